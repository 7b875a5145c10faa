package server

import (
	"encoding/json"
	"net/http"
	"strconv"
	"time"

	"github.com/go-chi/chi/v5"
)

// pageData is what the page template gets.
type pageData struct {
	Mode    string
	Version string
	Replay  bool
	Check   bool
}

func (s *Server) handlePage(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	d := pageData{Mode: s.opts.Mode, Version: s.opts.Version, Replay: s.opts.Replay != nil, Check: s.opts.CheckPanel}
	if err := s.page.ExecuteTemplate(w, "index.html", d); err != nil {
		s.opts.Logger.Error("render page", "err", err)
	}
}

// hello is the first websocket message.
type hello struct {
	Mode     string  `json:"mode"`
	TickMs   float64 `json:"tick_ms"`
	HistoryS float64 `json:"history_s"`
	Replay   bool    `json:"replay"`
	Bus      bool    `json:"bus"`
	Version  string  `json:"version"`
}

func (s *Server) handleWS(w http.ResponseWriter, r *http.Request) {
	conn, err := s.up.Upgrade(w, r, nil) // checks Origin, answers errors itself
	if err != nil {
		return
	}
	c := newClient(s.hub, conn)
	if !s.hub.add(c) {
		conn.Close()
		return
	}
	hb, _ := json.Marshal(hello{
		Mode: s.opts.Mode, TickMs: float64(s.opts.Tick) / float64(time.Millisecond),
		HistoryS: s.opts.History.Seconds(), Replay: s.opts.Replay != nil,
		Bus: s.opts.BusView != nil, Version: s.opts.Version,
	})
	go c.writePump(envelope("hello", hb), envelope("history", s.hub.hist.marshal()))
	c.readPump()
}

func writeJSON(w http.ResponseWriter, code int, v any) {
	b, err := json.Marshal(v)
	if err != nil {
		http.Error(w, "encode: "+err.Error(), http.StatusInternalServerError)
		return
	}
	writeRaw(w, code, b)
}

func writeRaw(w http.ResponseWriter, code int, b []byte) {
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(code)
	_, _ = w.Write(b)
}

// handleState serves the snapshot of the latest tick, the same bytes the
// websocket clients got.
func (s *Server) handleState(w http.ResponseWriter, r *http.Request) {
	f := s.hub.latest.Load()
	if f == nil {
		writeJSON(w, http.StatusServiceUnavailable, map[string]string{"error": "no snapshot yet"})
		return
	}
	writeRaw(w, http.StatusOK, f.json)
}

func (s *Server) handleProfile(w http.ResponseWriter, r *http.Request) {
	if s.opts.ProfileJSON == nil {
		writeJSON(w, http.StatusNotFound, map[string]string{"error": "no profile"})
		return
	}
	writeJSON(w, http.StatusOK, s.opts.ProfileJSON())
}

func (s *Server) handleBus(w http.ResponseWriter, r *http.Request) {
	if s.opts.BusView == nil {
		writeJSON(w, http.StatusNotFound, map[string]string{"error": "no bus view"})
		return
	}
	writeJSON(w, http.StatusOK, s.opts.BusView())
}

// health is the /healthz answer.
type health struct {
	Status   string  `json:"status"` // ok | stalled | starting
	Seq      uint64  `json:"seq"`
	TickAgeS float64 `json:"tick_age_s"`
	Clients  int     `json:"clients"`
	Dropped  uint64  `json:"clients_dropped"`
	Mode     string  `json:"mode"`
}

func (s *Server) handleHealth(w http.ResponseWriter, r *http.Request) {
	h := health{Status: "starting", Clients: s.hub.count(), Dropped: s.hub.dropped.Load(), Mode: s.opts.Mode}
	code := http.StatusServiceUnavailable
	if f := s.hub.latest.Load(); f != nil {
		h.Seq = f.snap.Seq
		age := time.Since(f.at)
		h.TickAgeS = age.Seconds()
		h.Status = "stalled"
		if age < 10*s.opts.Tick+time.Second {
			h.Status, code = "ok", http.StatusOK
		}
	}
	writeJSON(w, code, h)
}

// handleAck acknowledges one alarm. The route is Origin-checked by the guard.
func (s *Server) handleAck(w http.ResponseWriter, r *http.Request) {
	id, err := strconv.ParseUint(chi.URLParam(r, "id"), 10, 64)
	if err != nil {
		writeJSON(w, http.StatusBadRequest, map[string]string{"error": "alarm id must be a number"})
		return
	}
	if err := s.opts.Engine.Ack(chi.URLParam(r, "pack"), id); err != nil {
		writeJSON(w, http.StatusNotFound, map[string]string{"error": err.Error()})
		return
	}
	s.opts.Logger.Info("alarm acknowledged", "pack", chi.URLParam(r, "pack"), "alarm", id, "remote", r.RemoteAddr)
	writeJSON(w, http.StatusOK, map[string]bool{"acked": true})
}

// handleReplay drives the replay: pause, play, seek?offset_s=, speed?x=.
func (s *Server) handleReplay(w http.ResponseWriter, r *http.Request) {
	rp := s.opts.Replay
	var err error
	q := r.URL.Query()
	switch chi.URLParam(r, "action") {
	case "pause":
		err = rp.Pause()
	case "play":
		err = rp.Play()
	case "seek":
		var off float64
		off, err = strconv.ParseFloat(q.Get("offset_s"), 64)
		if err != nil || off < 0 || off > 1e9 {
			writeJSON(w, http.StatusBadRequest, map[string]string{"error": "offset_s must be seconds from the start, 0 or more"})
			return
		}
		err = rp.Seek(time.Duration(off * float64(time.Second)))
	case "speed":
		var x float64
		x, err = strconv.ParseFloat(q.Get("x"), 64)
		if err != nil || !(x > 0 && x <= 1000) {
			writeJSON(w, http.StatusBadRequest, map[string]string{"error": "x must be a speed factor above 0 and at most 1000"})
			return
		}
		err = rp.SetSpeed(x)
	default:
		writeJSON(w, http.StatusNotFound, map[string]string{"error": "unknown replay action"})
		return
	}
	if err != nil {
		writeJSON(w, http.StatusConflict, map[string]string{"error": err.Error()})
		return
	}
	writeJSON(w, http.StatusOK, map[string]bool{"ok": true})
}
