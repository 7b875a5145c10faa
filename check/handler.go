package check

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"mime"
	"net/http"
	"strings"
	"sync"
	"time"

	"packwatch/config"
	"packwatch/pack"
	"packwatch/record"
)

// Snapshotter gives the live engine's snapshots (pack.Engine).
type Snapshotter interface {
	Snapshot(serverTime time.Time) *pack.Snapshot
}

// EventSink receives events for the session's recording (record.Writer).
type EventSink interface {
	Event(e record.Event)
}

// HandlerOptions configure the check panel's API. Engine, Profile and
// History are required.
type HandlerOptions struct {
	// Prefix is where the handler is mounted, default "/api/check"; it
	// serves paths under it whether or not the prefix was stripped.
	Prefix string
	// Engine gives the live snapshots.
	Engine Snapshotter
	// Profile returns the profile in use for a pack id, nil for none.
	Profile func(packID string) *config.Profile
	// History stores the saved results.
	History *History
	// Events, if set, receives each saved result as a "check" event (the
	// session's recording).
	Events EventSink
	// Raw, if set, supplies the raw messages of a run's window.
	Raw *RawTap
	// Mode is the session's mode: live (default), simulated or replay.
	Mode string
	// Source describes the session's data in words ("live sources bms,
	// console", "recording FILE").
	Source string
	// MaxWindow bounds a run's window, default 120 s; the default window is 10 s.
	MaxWindow time.Duration
	// Now and After are the wall clock (tests inject them).
	Now   func() time.Time
	After func(d time.Duration) <-chan time.Time
}

// Handler serves the dashboard's check panel:
//
//	GET  {prefix}/settings?pack=ID     the pack's requirements and checklist
//	POST {prefix}/run                  {"pack","seconds","operator"}: watch the
//	                                   live pack for the window, answer the unsaved result
//	POST {prefix}/save                 {"pending","confirmed":[bool],"operator","note"}:
//	                                   tick the checklist, chain, store, record the event
//	GET  {prefix}/history?key=KEY      saved results of one pack (all without key), newest first
//	GET  {prefix}/results/HASH         one result as JSON (?download=1: as a file)
//	GET  {prefix}/results/HASH/print   one result as a printable page
//	GET  {prefix}/verify               the history's hash chain: records, head, problems
//	GET  {prefix}/schema.json          the JSON Schema of a result
//
// POST bodies must be JSON (Content-Type application/json), at most 64 KiB.
// Security checks (Host, Origin, token) are the server's; mount the handler
// behind them.
type Handler struct {
	opt     HandlerOptions
	mux     *http.ServeMux
	mu      sync.Mutex
	pending map[string]*pendingRun
	running map[string]bool
}

type pendingRun struct {
	rec     *Record
	dataEnd int64
	made    time.Time
}

// safeWindow is the longest window when the write deadline cannot be lifted.
const safeWindow = 20 * time.Second

// pendingTTL is how long an unsaved result waits for its save.
const pendingTTL = time.Hour

// NewHandler builds the handler.
func NewHandler(opt HandlerOptions) (*Handler, error) {
	if opt.Engine == nil || opt.Profile == nil || opt.History == nil {
		return nil, errors.New("check handler: Engine, Profile and History are required")
	}
	if opt.Prefix == "" {
		opt.Prefix = "/api/check"
	}
	opt.Prefix = strings.TrimRight(opt.Prefix, "/")
	if opt.Mode == "" {
		opt.Mode = ModeLive
	}
	if opt.MaxWindow <= 0 {
		opt.MaxWindow = 120 * time.Second
	}
	if opt.Now == nil {
		opt.Now = time.Now
	}
	if opt.After == nil {
		opt.After = time.After
	}
	h := &Handler{opt: opt, mux: http.NewServeMux(), pending: map[string]*pendingRun{}, running: map[string]bool{}}
	for _, p := range []string{opt.Prefix, ""} {
		h.mux.HandleFunc("GET "+p+"/settings", h.settings)
		h.mux.HandleFunc("POST "+p+"/run", h.run)
		h.mux.HandleFunc("POST "+p+"/save", h.save)
		h.mux.HandleFunc("GET "+p+"/history", h.history)
		h.mux.HandleFunc("GET "+p+"/results/{hash}", h.result)
		h.mux.HandleFunc("GET "+p+"/results/{hash}/print", h.print)
		h.mux.HandleFunc("GET "+p+"/verify", h.verify)
		h.mux.HandleFunc("GET "+p+"/schema.json", h.schema)
	}
	return h, nil
}

// ServeHTTP implements http.Handler.
func (h *Handler) ServeHTTP(w http.ResponseWriter, r *http.Request) { h.mux.ServeHTTP(w, r) }

func writeJSON(w http.ResponseWriter, code int, v any) {
	b, err := json.Marshal(v)
	if err != nil {
		http.Error(w, "encode: "+err.Error(), http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(code)
	w.Write(append(b, '\n'))
}

func fail(w http.ResponseWriter, code int, format string, a ...any) {
	writeJSON(w, code, map[string]string{"error": fmt.Sprintf(format, a...)})
}

// readJSON decodes a JSON body of at most 64 KiB into v.
func readJSON(w http.ResponseWriter, r *http.Request, v any) bool {
	if mt, _, _ := mime.ParseMediaType(r.Header.Get("Content-Type")); mt != "application/json" {
		fail(w, http.StatusUnsupportedMediaType, "send JSON with Content-Type: application/json")
		return false
	}
	dec := json.NewDecoder(http.MaxBytesReader(w, r.Body, 64<<10))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		fail(w, http.StatusBadRequest, "bad request: %v", err)
		return false
	}
	return true
}

func (h *Handler) settings(w http.ResponseWriter, r *http.Request) {
	id := r.URL.Query().Get("pack")
	p := h.opt.Profile(id)
	if p == nil {
		fail(w, http.StatusNotFound, "no pack %q", id)
		return
	}
	s := Resolve(p)
	writeJSON(w, http.StatusOK, map[string]any{"pack": id, "settings": s.List(), "manual": append([]string{}, s.Manual...),
		"window_s": 10, "max_window_s": h.opt.MaxWindow.Seconds(), "caution": Caution})
}

type runRequest struct {
	Pack     string  `json:"pack"`
	Seconds  float64 `json:"seconds"`
	Operator string  `json:"operator"`
}

type runResponse struct {
	Pending string  `json:"pending"` // id to save the result with
	Record  *Record `json:"record"`
}

func packOf(s *pack.Snapshot, id string) *pack.PackSnapshot {
	if s == nil {
		return nil
	}
	for i := range s.Packs {
		if s.Packs[i].ID == id {
			return &s.Packs[i]
		}
	}
	return nil
}

func messagesOf(p *pack.PackSnapshot) uint64 {
	var n uint64
	for _, s := range p.Sources {
		n += s.Messages
	}
	return n
}

// run watches the pack for the window and answers the unsaved result.
func (h *Handler) run(w http.ResponseWriter, r *http.Request) {
	var req runRequest
	if !readJSON(w, r, &req) {
		return
	}
	p := h.opt.Profile(req.Pack)
	if p == nil {
		fail(w, http.StatusNotFound, "no pack %q", req.Pack)
		return
	}
	d := 10 * time.Second
	if req.Seconds != 0 {
		d = time.Duration(req.Seconds * float64(time.Second))
	}
	if d < time.Second || d > h.opt.MaxWindow {
		fail(w, http.StatusBadRequest, "seconds must be from 1 to %.0f", h.opt.MaxWindow.Seconds())
		return
	}
	// The answer comes after the window: lift the server's write deadline
	// for this request. Where the writer cannot, stay well inside the
	// usual 30 s.
	if err := http.NewResponseController(w).SetWriteDeadline(time.Now().Add(d + 30*time.Second)); err != nil && d > safeWindow {
		fail(w, http.StatusBadRequest, "seconds must be at most %.0f on this server", safeWindow.Seconds())
		return
	}
	h.mu.Lock()
	if h.running[req.Pack] {
		h.mu.Unlock()
		fail(w, http.StatusConflict, "a check of pack %s is already running", req.Pack)
		return
	}
	h.running[req.Pack] = true
	h.mu.Unlock()
	defer func() {
		h.mu.Lock()
		delete(h.running, req.Pack)
		h.mu.Unlock()
	}()

	win, err := h.watch(r.Context(), req.Pack, d)
	if err != nil {
		fail(w, http.StatusServiceUnavailable, "check interrupted: %v", err)
		return
	}
	raw := Raw{Format: RawFormat}
	info := DataInfo{Mode: h.opt.Mode, Source: h.opt.Source, Simulated: h.opt.Mode == ModeSimulated}
	if info.Source == "" {
		info.Source = h.opt.Mode + " session"
	}
	if h.opt.Raw != nil {
		var complete bool
		raw, complete = h.opt.Raw.Raw(win.From, win.To+1)
		if !complete {
			info.Source += " (raw messages of the window incomplete: the tap's ring was overrun)"
		}
	}
	now := h.opt.Now()
	rec := NewRecord(win, raw, Resolve(p), Inputs{Profile: p, PackID: req.Pack, Operator: req.Operator, Data: info, Now: now})
	if win.Start != nil && len(win.Samples) > 0 && messagesOf(&win.Samples[len(win.Samples)-1].Pack) == messagesOf(win.Start) {
		rec.Verdict = VerdictCouldNotCheck // no message at all during the window
		rec.Data.Notice = strings.TrimSpace(rec.Data.Notice + " No message arrived during the check.")
	}
	id := newID()
	h.mu.Lock()
	for k, pr := range h.pending {
		if now.Sub(pr.made) > pendingTTL {
			delete(h.pending, k)
		}
	}
	h.pending[id] = &pendingRun{rec: rec, dataEnd: win.To, made: now}
	h.mu.Unlock()
	writeJSON(w, http.StatusOK, runResponse{Pending: id, Record: rec})
}

// watch samples the pack once a second of wall time for d. The window is
// in data time; when data time stalls (a silent bus), the wall clock's
// length is used so the rate rule sees the silence.
func (h *Handler) watch(ctx context.Context, id string, d time.Duration) (Window, error) {
	wallFrom := h.opt.Now()
	first := h.opt.Engine.Snapshot(wallFrom)
	var w Window
	if sp := packOf(first, id); sp != nil {
		c := *sp
		w.Start = &c
	}
	w.From = int64(float64(first.DataT) * 1e9)
	steps := int(d / time.Second)
	for i := 1; i <= steps; i++ {
		select {
		case <-ctx.Done():
			return Window{}, ctx.Err()
		case <-h.opt.After(time.Second):
		}
		now := h.opt.Now()
		s := h.opt.Engine.Snapshot(now)
		sp := packOf(s, id)
		if sp == nil {
			continue
		}
		w.Samples = append(w.Samples, Sample{T: int64(float64(s.DataT) * 1e9), Pack: *sp})
	}
	wallTo := h.opt.Now()
	w.To = w.From
	if n := len(w.Samples); n > 0 {
		w.To = w.Samples[n-1].T
	}
	if w.From == 0 && len(w.Samples) > 0 {
		w.From = w.Samples[0].T
	}
	if wall := wallTo.Sub(wallFrom); time.Duration(w.To-w.From) < wall/2 {
		w.To = w.From + int64(wall)
	}
	return w, nil
}

func newID() string {
	var b [12]byte
	rand.Read(b[:])
	return hex.EncodeToString(b[:])
}

type saveRequest struct {
	Pending   string `json:"pending"`
	Confirmed []bool `json:"confirmed"`
	Operator  string `json:"operator"`
	Note      string `json:"note"`
}

func (h *Handler) save(w http.ResponseWriter, r *http.Request) {
	var req saveRequest
	if !readJSON(w, r, &req) {
		return
	}
	h.mu.Lock()
	pr := h.pending[req.Pending]
	delete(h.pending, req.Pending)
	h.mu.Unlock()
	if pr == nil {
		fail(w, http.StatusNotFound, "no unsaved check %q (already saved, or older than %s)", req.Pending, pendingTTL)
		return
	}
	rec := pr.rec
	if err := rec.Confirm(req.Confirmed, req.Operator, req.Note); err != nil {
		fail(w, http.StatusConflict, "%v", err)
		return
	}
	prev, err := h.opt.History.Last(r.Context(), rec.Pack.Key)
	if err == nil {
		rec.Compare(prev)
		err = h.opt.History.Save(r.Context(), rec)
	}
	if err != nil {
		h.mu.Lock()
		h.pending[req.Pending] = pr // keep it for another try
		h.mu.Unlock()
		fail(w, http.StatusInternalServerError, "%v", err)
		return
	}
	if h.opt.Events != nil {
		body, _ := jsonOf(rec)
		h.opt.Events.Event(record.Event{T: pr.dataEnd, Kind: record.EventCheck, Source: record.NoSource,
			Text: EventText(rec), JSON: string(body)})
	}
	writeJSON(w, http.StatusOK, rec)
}

// EventText is the one-line text of a saved result in a recording.
func EventText(r *Record) string {
	s := fmt.Sprintf("pre-flight check %s: %s", r.Banner(), r.Pack.Name)
	if r.Pack.Serial != "" {
		s += " (" + r.Pack.Serial + ")"
	}
	if r.Operator != "" {
		s += " by " + r.Operator
	}
	if f := r.Summary().Failing; len(f) > 0 {
		s += "; not passed: " + strings.Join(f, ", ")
	}
	return s + "; record " + short(r.Hash)
}

func (h *Handler) history(w http.ResponseWriter, r *http.Request) {
	list, err := h.opt.History.List(r.Context(), r.URL.Query().Get("key"), 200)
	if err != nil {
		fail(w, http.StatusInternalServerError, "%v", err)
		return
	}
	writeJSON(w, http.StatusOK, list)
}

func (h *Handler) get(w http.ResponseWriter, r *http.Request) *Record {
	rec, err := h.opt.History.Get(r.Context(), r.PathValue("hash"))
	if errors.Is(err, ErrNotFound) {
		fail(w, http.StatusNotFound, "%v", err)
		return nil
	}
	if err != nil {
		fail(w, http.StatusBadRequest, "%v", err)
		return nil
	}
	return rec
}

func (h *Handler) result(w http.ResponseWriter, r *http.Request) {
	rec := h.get(w, r)
	if rec == nil {
		return
	}
	b, err := rec.JSON()
	if err != nil {
		fail(w, http.StatusInternalServerError, "%v", err)
		return
	}
	w.Header().Set("Content-Type", "application/json")
	if r.URL.Query().Get("download") != "" {
		w.Header().Set("Content-Disposition", fmt.Sprintf(`attachment; filename="check-%s.json"`, short(rec.Hash)))
	}
	w.Write(b)
}

func (h *Handler) print(w http.ResponseWriter, r *http.Request) {
	rec := h.get(w, r)
	if rec == nil {
		return
	}
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.Header().Set("Content-Security-Policy", "default-src 'none'; style-src 'unsafe-inline'")
	WriteHTML(w, rec)
}

func (h *Handler) verify(w http.ResponseWriter, r *http.Request) {
	n, head, probs, err := h.opt.History.Verify(r.Context())
	if err != nil {
		fail(w, http.StatusInternalServerError, "%v", err)
		return
	}
	if probs == nil {
		probs = []Problem{}
	}
	writeJSON(w, http.StatusOK, map[string]any{"records": n, "head": head, "intact": len(probs) == 0, "problems": probs})
}

func (h *Handler) schema(w http.ResponseWriter, _ *http.Request) {
	w.Header().Set("Content-Type", "application/schema+json")
	w.Write(Schema)
}
