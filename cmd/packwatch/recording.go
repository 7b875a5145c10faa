package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"os"
	"os/exec"
	"runtime"
	"strconv"
	"time"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
	"packwatch/record"
)

// runRecord records a profile's live sources headless.
func runRecord(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("record", stderr)
	profile := fs.String("profile", "", "profile `FILE`")
	out := fs.String("o", "", "recording `FILE` to write (SQLite)")
	dur := fs.Duration("for", 0, "stop after this `DURATION` (default: until Ctrl-C)")
	force := fs.Bool("force", false, "replace an existing file")
	appendTo := fs.Bool("append", false, "continue an existing recording")
	operator := fs.String("operator", "", "who runs the session (stored in the recording)")
	notes := fs.String("notes", "", "operator notes (stored in the recording)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "Usage: packwatch record --profile FILE -o FILE [--for D]\n\nRecords the profile's live sources raw to a SQLite file, with no page (a field laptop with the lid shut).")
		fs.PrintDefaults()
	}
	if _, err := parseArgs(fs, args); err != nil {
		return exitFor(err)
	}
	if *out == "" {
		fmt.Fprintln(stderr, "record: -o FILE is required")
		return exitBad
	}
	p, m, err := loadProfile(*profile, stderr)
	if err != nil {
		fmt.Fprintln(stderr, err)
		return exitBad
	}
	log := slog.New(slog.NewTextHandler(stderr, nil))
	s, err := newSession([]*config.Profile{p}, []*decode.Map{m}, "live", nil, log)
	if err != nil {
		fmt.Fprintln(stderr, "record:", err)
		return exitBad
	}
	rec, err := openRecording(*out, *force, *appendTo, "live", []*config.Profile{p}, s.devices)
	if err != nil {
		fmt.Fprintln(stderr, err)
		return exitBad
	}
	if *operator != "" || *notes != "" {
		rec.Event(record.Event{T: time.Now().UnixNano(), Kind: record.EventNote, Source: record.NoSource, Text: fmt.Sprintf("operator %q: %s", *operator, *notes)})
	}
	if s, err = newSession([]*config.Profile{p}, []*decode.Map{m}, "live", rec, log); err != nil {
		fmt.Fprintln(stderr, "record:", err)
		return exitBad
	}
	stopInhibit := inhibitSleep(log)
	defer stopInhibit()
	if *dur > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, *dur)
		defer cancel()
	}
	fmt.Fprintf(stdout, "recording %s to %s; Ctrl-C stops\n", p.Pack.Name, *out)
	// no page: take a snapshot a second so trips and warnings become events
	alog := newAlarmLog(rec)
	tickDone := make(chan struct{})
	tctx, tcancel := context.WithCancel(ctx)
	go func() {
		defer close(tickDone)
		warned := false
		tk := time.NewTicker(time.Second)
		defer tk.Stop()
		for {
			select {
			case <-tctx.Done():
				return
			case now := <-tk.C:
				alog.observe(s.eng.Snapshot(now))
				if err := rec.Err(); err != nil && !warned {
					fmt.Fprintf(stderr, "record: recording stopped: %v\n", err)
					warned = true
				}
			}
		}
	}()
	err = s.runDevices(ctx)
	tcancel()
	<-tickDone
	s.stats.flush()
	if cerr := rec.Close(); cerr != nil && err == nil {
		err = cerr
	}
	if err != nil && !errors.Is(err, context.DeadlineExceeded) {
		fmt.Fprintln(stderr, "record:", err)
		return exitBad
	}
	n, _ := rec.Committed()
	fmt.Fprintf(stdout, "%d messages recorded, %d blocks dropped\n", n, rec.Dropped())
	return exitOK
}

// inhibitSleep holds the OS's sleep inhibitor where one exists (systemd on
// Linux, caffeinate on macOS) and returns its release. Where none exists the
// recording goes on; a suspend then shows as a gap.
func inhibitSleep(log *slog.Logger) func() {
	var cmd *exec.Cmd
	switch runtime.GOOS {
	case "linux":
		if path, err := exec.LookPath("systemd-inhibit"); err == nil {
			cmd = exec.Command(path, "--what=sleep:idle", "--who=packwatch", "--why=recording a battery pack", "--mode=block", "sleep", "infinity")
		}
	case "darwin":
		cmd = exec.Command("caffeinate", "-i", "-w", strconv.Itoa(os.Getpid()))
	}
	if cmd == nil || cmd.Start() != nil {
		log.Info("no sleep inhibitor on this system: a suspend will show as a gap in the recording")
		return func() {}
	}
	done := make(chan struct{})
	go func() { cmd.Wait(); close(done) }()
	return func() {
		cmd.Process.Kill()
		<-done
	}
}

// runImport turns a capture file into a recording.
func runImport(_ context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("import", stderr)
	profile := fs.String("profile", "", "profile `FILE` that names the capture's sources")
	out := fs.String("o", "", "recording `FILE` to write")
	force := fs.Bool("force", false, "replace an existing file")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "Usage: packwatch import CAPTURE --profile FILE -o FILE\n\nTurns a capture file into a recording.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return exitFor(err)
	}
	if len(pos) != 1 || *out == "" {
		fs.Usage()
		return exitBad
	}
	p, _, err := loadProfile(*profile, stderr)
	if err != nil {
		fmt.Fprintln(stderr, err)
		return exitBad
	}
	f, err := os.Open(pos[0])
	if err != nil {
		fmt.Fprintln(stderr, "import:", err)
		return exitBad
	}
	defer f.Close()
	host, _ := os.Hostname()
	cr := bus.NewCaptureReader(f, sourceIndex(p))
	cr.OnError = func(e *bus.CaptureError) { fmt.Fprintf(stderr, "%s: %v\n", pos[0], e) }
	meta := record.Meta{Tool: "packwatch", Version: version, Host: host, Mode: "import", Notes: "imported from " + pos[0]}
	for i, s := range p.Sources {
		meta.Sources = append(meta.Sources, record.SourceInfo{Index: uint16(i), Name: s.Name, Kind: s.Kind, Device: s.Device})
	}
	var w *record.Writer
	batch := make([]bus.Message, 0, 4096)
	n := 0
	for cr.Scan() {
		if w == nil {
			meta.Start = time.Unix(0, cr.Start()).UTC()
			if w, err = record.Create(*out, meta, record.Options{Force: *force, Lossless: true}); err != nil {
				fmt.Fprintln(stderr, "import:", err)
				return exitBad
			}
			w.Profile(cr.Start(), p.Pack.Name, p.Text, p.Hash)
		}
		batch = append(batch, cr.Message())
		if len(batch) == cap(batch) {
			w.Write(batch)
			n += len(batch)
			batch = batch[:0]
		}
	}
	if err := cr.Err(); err != nil {
		fmt.Fprintln(stderr, "import:", err)
		return exitBad
	}
	if w == nil {
		fmt.Fprintf(stderr, "import: %s holds no messages\n", pos[0])
		return exitBad
	}
	w.Write(batch)
	n += len(batch)
	if err := w.Close(); err != nil {
		fmt.Fprintln(stderr, "import:", err)
		return exitBad
	}
	fmt.Fprintf(stdout, "%d messages imported into %s (%d malformed lines skipped)\n", n, *out, cr.Malformed)
	return exitOK
}

// recordingProfiles gives the profiles to decode a recording with: OTHER
// when given, else the latest version of each pack stored in the recording.
func recordingProfiles(r *record.Reader, other string, stderr io.Writer) ([]*config.Profile, []*decode.Map, error) {
	if other != "" {
		p, m, err := loadProfile(other, stderr)
		if err != nil {
			return nil, nil, err
		}
		return []*config.Profile{p}, []*decode.Map{m}, nil
	}
	versions, err := r.Profiles()
	if err != nil {
		return nil, nil, err
	}
	latest := map[string]record.ProfileVersion{}
	var order []string
	for _, v := range versions {
		if _, ok := latest[v.Name]; !ok {
			order = append(order, v.Name)
		}
		latest[v.Name] = v
	}
	if len(order) == 0 {
		return nil, nil, fmt.Errorf("%s holds no profile: give --profile FILE", r.Path())
	}
	var ps []*config.Profile
	var ms []*decode.Map
	for _, name := range order {
		v := latest[name]
		p, err := config.Parse(fmt.Sprintf("%s (profile %q stored in the recording)", r.Path(), name), []byte(v.Text))
		if err != nil {
			return nil, nil, err
		}
		m, err := decode.Compile(p)
		if err != nil {
			return nil, nil, err
		}
		ps, ms = append(ps, p), append(ms, m)
	}
	return ps, ms, nil
}

// recordingDevices is the device table of a recording, from its metadata.
func recordingDevices(r *record.Reader) []device {
	var devs []device
	for _, s := range r.Meta().Sources {
		devs = append(devs, device{spec: bus.Spec{Index: s.Index, Name: s.Name, Kind: s.Kind, Device: s.Device}})
	}
	return devs
}

// runReplay drives the dashboard from a recording.
func runReplay(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := newFlags("replay", stderr)
	var f serveFlags
	f.register(fs)
	speedStr := fs.String("speed", "1", "replay `SPEED`: a factor of real time, or max")
	other := fs.String("profile", "", "re-decode with this profile `FILE` instead of the recorded one")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "Usage: packwatch replay FILE [--speed N|max] [--profile OTHER] [--addr 127.0.0.1:8080]\n\nPlays a recording through the dashboard on its own data time, with play, pause, seek and speed on the page.")
		fs.PrintDefaults()
	}
	pos, err := parseArgs(fs, args)
	if err != nil {
		return exitFor(err)
	}
	if len(pos) != 1 {
		fs.Usage()
		return exitBad
	}
	speed := 0.0
	if *speedStr != "max" {
		if speed, err = strconv.ParseFloat(*speedStr, 64); err != nil || speed <= 0 {
			fmt.Fprintf(stderr, "replay: --speed %q: a positive factor or max\n", *speedStr)
			return exitBad
		}
	}
	r, err := record.Open(pos[0])
	if err != nil {
		fmt.Fprintln(stderr, "replay:", err)
		return exitBad
	}
	defer r.Close()
	ps, ms, err := recordingProfiles(r, *other, stderr)
	if err != nil {
		fmt.Fprintln(stderr, "replay:", err)
		return exitBad
	}
	log := slog.New(slog.NewTextHandler(stderr, &slog.HandlerOptions{Level: slog.LevelWarn}))
	s, err := newSessionOn(recordingDevices(r), true, ps, ms, "replay", nil, log)
	if err != nil {
		fmt.Fprintln(stderr, "replay:", err)
		return exitBad
	}
	rp := record.NewReplay(r, record.ReplayOptions{Speed: speed, Hold: true, OnSeek: func(int64) { s.eng.Reset() }})
	events, err := replayEvents(r)
	if err != nil {
		fmt.Fprintln(stderr, "replay:", err)
		return exitBad
	}
	s.extra = map[string]http.Handler{"/api/replay/events": events}
	addReview(ctx, s.extra, pos[0], *other, stderr)
	fmt.Fprintf(stdout, "replaying %s (REPLAY, not live data)\n", pos[0])
	err = runSessionWith(ctx, s, &f, "replay", rp, func(ctx context.Context) error { return rp.Run(ctx, s) }, stdout)
	if err != nil {
		fmt.Fprintln(stderr, "replay:", err)
		return exitBad
	}
	return exitOK
}

// replayEvents serves the recording's events for the replay panel's
// timeline: each with its data time and its offset from the recording's
// first message (what the page's seek takes).
func replayEvents(r *record.Reader) (http.Handler, error) {
	first, _, _, err := r.Span()
	if err != nil {
		return nil, err
	}
	evs, err := r.Events()
	if err != nil {
		return nil, err
	}
	type event struct {
		T       float64 `json:"t"`
		OffsetS float64 `json:"offset_s"`
		Kind    string  `json:"kind"`
		Text    string  `json:"text"`
	}
	list := make([]event, 0, len(evs))
	for _, e := range evs {
		list = append(list, event{T: float64(e.T) / 1e9, OffsetS: max(0, float64(e.T-first)/1e9), Kind: e.Kind, Text: e.Text})
	}
	body, err := json.Marshal(map[string]any{"start_t": float64(first) / 1e9, "events": list})
	if err != nil {
		return nil, err
	}
	return http.HandlerFunc(func(w http.ResponseWriter, req *http.Request) {
		if req.Method != http.MethodGet {
			http.Error(w, "GET only", http.StatusMethodNotAllowed)
			return
		}
		w.Header().Set("Content-Type", "application/json")
		w.Write(body)
	}), nil
}
