package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"golang.org/x/sync/errgroup"

	"packwatch/bus"
	"packwatch/check"
	"packwatch/config"
	"packwatch/decode"
	"packwatch/metrics"
	"packwatch/pack"
	"packwatch/record"
	"packwatch/server"
)

// packEntry is one profile (one pack) in a session.
type packEntry struct {
	id     string
	prof   *config.Profile
	m      *decode.Map
	srcMap []int // engine source index → profile source index, or -1
}

// device is one opened source, shared by every pack whose profile names the
// same kind and device.
type device struct {
	spec bus.Spec
}

// session wires packs, devices, engine, recorder and server together.
type session struct {
	packs   []*packEntry
	devices []device
	eng     *pack.Engine
	rec     *record.Writer
	mode    string
	log     *slog.Logger
	mu      sync.Mutex // guards each packEntry's prof and m (reload swaps them)
	stats   *statsRecorder
	tap     *check.RawTap
	extra   map[string]http.Handler // more routes (replay's events)
}

// profileOf returns the profile in use for a pack id, nil for none.
func (s *session) profileOf(id string) *config.Profile {
	s.mu.Lock()
	defer s.mu.Unlock()
	for _, p := range s.packs {
		if p.id == id {
			return p.prof
		}
	}
	return nil
}

// describe says where the session's data comes from, for check records.
func (s *session) describe() string {
	var names []string
	for _, d := range s.devices {
		names = append(names, d.spec.Name+" ("+d.spec.Kind+" "+d.spec.Device+")")
	}
	switch s.mode {
	case "simulated":
		return "simulated pack"
	case "replay":
		return "replay of a recording: " + strings.Join(names, ", ")
	}
	return "live sources " + strings.Join(names, ", ")
}

// newSession builds the engine for the given profiles. Devices used by
// several profiles are opened once: the engine's source table lists each
// (kind, device) once and every pack maps it to its own source.
func newSession(profiles []*config.Profile, maps []*decode.Map, mode string, rec *record.Writer, log *slog.Logger) (*session, error) {
	var devices []device
	index := map[string]int{}
	for _, p := range profiles {
		for i, src := range p.Sources {
			key := src.Kind + "|" + src.Device
			if _, ok := index[key]; !ok {
				spec := specFor(p, i)
				spec.Index = uint16(len(devices))
				index[key] = len(devices)
				devices = append(devices, device{spec: spec})
			}
		}
	}
	return newSessionOn(devices, false, profiles, maps, mode, rec, log)
}

// newSessionOn builds the engine over a given device table (a replay uses
// the recording's). Each pack maps a device to its own source of the same
// kind and device, else (when byName) of the same name.
func newSessionOn(devices []device, byName bool, profiles []*config.Profile, maps []*decode.Map, mode string, rec *record.Writer, log *slog.Logger) (*session, error) {
	s := &session{mode: mode, rec: rec, log: log, devices: devices}
	opt := pack.Options{Mode: mode, WallClockAges: mode == "live"}
	var names []string
	for _, d := range devices {
		names = append(names, d.spec.Name)
	}
	// the check panel keeps the latest raw messages for a result's record
	s.tap = check.NewRawTap(0, names)
	var stats *statsRecorder
	if rec != nil {
		stats = &statsRecorder{}
		opt.RawSink = check.RawTee{stats, s.tap}
	} else {
		opt.RawSink = s.tap
	}
	s.eng = pack.NewEngine(opt)
	ids := map[string]int{}
	for pi, p := range profiles {
		e := &packEntry{prof: p, m: maps[pi], srcMap: make([]int, len(s.devices))}
		for di, d := range s.devices {
			e.srcMap[di] = -1
			for i, src := range p.Sources {
				if src.Kind == d.spec.Kind && src.Device == d.spec.Device {
					e.srcMap[di] = i
					break
				}
			}
			if e.srcMap[di] >= 0 || !byName {
				continue
			}
			for i, src := range p.Sources {
				if src.Name == d.spec.Name {
					e.srcMap[di] = i
					break
				}
			}
		}
		e.id = packKey(p, pi)
		if n := ids[e.id]; n > 0 {
			e.id = fmt.Sprintf("%s-%d", e.id, n+1)
		}
		ids[e.id]++
		if err := s.eng.AddPack(e.id, e.m, e.srcMap); err != nil {
			return nil, err
		}
		s.packs = append(s.packs, e)
	}
	if stats != nil {
		*stats = *newStatsRecorder(rec, s.packs)
		s.stats = stats
	}
	return s, nil
}

// packKey is a short, URL-safe key for a pack: the fixed serial, else the
// profile file's base name.
func packKey(p *config.Profile, i int) string {
	if p.Pack.Serial != "" {
		return sanitizeKey(p.Pack.Serial)
	}
	base := strings.TrimSuffix(filepath.Base(p.File), filepath.Ext(p.File))
	if base == "" || base == "." {
		return fmt.Sprintf("pack%d", i+1)
	}
	return sanitizeKey(base)
}

func sanitizeKey(s string) string {
	var b strings.Builder
	for _, r := range s {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '-', r == '_':
			b.WriteRune(r)
		default:
			b.WriteByte('-')
		}
	}
	return b.String()
}

// Deliver and Status make the session a bus.Sink: the engine takes the
// batches (and hands them to the recorder); status changes are recorded as
// events too.
func (s *session) Deliver(batch []bus.Message) { s.eng.Deliver(batch) }

// Status forwards a source's status to the engine and the recording.
func (s *session) Status(st bus.Status) {
	s.eng.Status(st)
	name := "?"
	if int(st.Src) < len(s.devices) {
		name = s.devices[st.Src].spec.Name
	}
	s.log.Info("source", "name", name, "state", st.State.String(), "reason", st.Reason)
	if s.rec != nil {
		kind := record.EventConnect
		switch st.State {
		case bus.StateDisconnected, bus.StateStopped:
			kind = record.EventDisconnect
		case bus.StateConnecting:
			return
		}
		s.rec.Event(record.Event{T: st.T, Kind: kind, Source: int(st.Src), Text: name + ": " + st.State.String() + " " + st.Reason})
	}
}

// runDevices opens and runs every device into the session until ctx ends.
func (s *session) runDevices(ctx context.Context) error {
	g, ctx := errgroup.WithContext(ctx)
	for _, d := range s.devices {
		src, err := bus.Open(d.spec)
		if err != nil {
			return err
		}
		g.Go(func() error { return src.Run(ctx, s) })
	}
	err := g.Wait()
	if errors.Is(err, context.Canceled) {
		return nil
	}
	return err
}

// profileJSON is what /api/profile serves: each pack's effective profile.
func (s *session) profileJSON() any {
	type out struct {
		ID      string          `json:"id"`
		File    string          `json:"file"`
		Hash    string          `json:"hash"`
		Profile *config.Profile `json:"profile"`
		Text    string          `json:"text"`
	}
	var list []out
	s.mu.Lock()
	defer s.mu.Unlock()
	for _, p := range s.packs {
		list = append(list, out{ID: p.id, File: p.prof.File, Hash: p.prof.Hash, Profile: p.prof, Text: p.prof.Text})
	}
	return list
}

// openRecording creates the recording named by --record, or returns nil.
func openRecording(path string, force, appendTo bool, mode string, profiles []*config.Profile, devices []device) (*record.Writer, error) {
	if path == "" {
		return nil, nil
	}
	host, _ := os.Hostname()
	meta := record.Meta{Tool: "packwatch", Version: version, Host: host, Start: time.Now().UTC(), Mode: mode}
	for _, d := range devices {
		meta.Sources = append(meta.Sources, record.SourceInfo{Index: d.spec.Index, Name: d.spec.Name, Kind: d.spec.Kind, Device: d.spec.Device})
	}
	w, err := record.Create(path, meta, record.Options{Force: force, Append: appendTo})
	if err != nil {
		return nil, fmt.Errorf("record: %w", err)
	}
	now := time.Now().UnixNano()
	for _, p := range profiles {
		w.Profile(now, p.Pack.Name, p.Text, p.Hash)
	}
	return w, nil
}

// openCheckHistory opens the pre-flight check history at path, or at the
// default place.
func openCheckHistory(path string) (*check.History, error) {
	if path == "" {
		var err error
		if path, err = check.DefaultHistoryPath(); err != nil {
			return nil, err
		}
	}
	return check.OpenHistory(path)
}

// serveFlags are the flags serve and demo share.
type serveFlags struct {
	addr, token, tlsCert, tlsKey, record string
	checkHistory                         string
	force, appendRec                     bool
}

func (f *serveFlags) register(fs interface {
	StringVar(*string, string, string, string)
	BoolVar(*bool, string, bool, string)
}) {
	fs.StringVar(&f.addr, "addr", "127.0.0.1:8080", "listen `ADDRESS`; anything but loopback needs a token")
	fs.StringVar(&f.token, "token", "", "access `TOKEN` (generated and printed when listening off loopback)")
	fs.StringVar(&f.tlsCert, "tls-cert", "", "TLS certificate `FILE` (PEM), with --tls-key")
	fs.StringVar(&f.tlsKey, "tls-key", "", "TLS key `FILE` (PEM)")
	fs.StringVar(&f.record, "record", "", "record the session raw to `FILE` (SQLite)")
	fs.BoolVar(&f.force, "force", false, "with --record: replace an existing file")
	fs.BoolVar(&f.appendRec, "append", false, "with --record: continue an existing recording")
	fs.StringVar(&f.checkHistory, "check-history", "", "pre-flight check history `FILE` (default: in the user's config folder, or $"+check.HistoryEnv+")")
}

// runSession runs the server and the data sources until ctx ends, then
// shuts everything down in order: sources, server, recorder.
func runSession(ctx context.Context, s *session, f *serveFlags, mode string, data func(ctx context.Context) error, stdout io.Writer) error {
	return runSessionWith(ctx, s, f, mode, nil, data, stdout)
}

// runSessionWith is runSession with replay controls on the page.
func runSessionWith(ctx context.Context, s *session, f *serveFlags, mode string, replay server.Replay, data func(ctx context.Context) error, stdout io.Writer) error {
	mh := metrics.NewHandler(metrics.Options{Version: version, Logger: s.log})
	handlers := map[string]http.Handler{"/metrics": mh}
	for pattern, h := range s.extra {
		handlers[pattern] = h
	}
	checkPanel := false
	if hist, err := openCheckHistory(f.checkHistory); err != nil {
		s.log.Warn("pre-flight check panel off", "err", err)
	} else {
		defer hist.Close()
		ho := check.HandlerOptions{Engine: s.eng, Profile: s.profileOf, History: hist, Raw: s.tap, Mode: mode, Source: s.describe()}
		if s.rec != nil {
			ho.Events = s.rec
		}
		if ch, err := check.NewHandler(ho); err != nil {
			s.log.Warn("pre-flight check panel off", "err", err)
		} else {
			handlers["/api/check/*"] = ch
			checkPanel = true
		}
	}
	alog := newAlarmLog(s.rec)
	observe := func(snap *pack.Snapshot) {
		mh.Observe(snap)
		alog.observe(snap)
	}
	srv, err := server.New(server.Options{
		Replay: replay, OnSnapshot: observe, Handlers: handlers, CheckPanel: checkPanel,
		Addr: f.addr, Engine: s.eng, Token: f.token, TLSCert: f.tlsCert, TLSKey: f.tlsKey,
		BusView:     func() any { return s.eng.BusView() },
		ProfileJSON: s.profileJSON,
		Mode:        mode, Version: version, Logger: s.log, Banner: stdout,
	})
	if err != nil {
		return err
	}
	g, gctx := errgroup.WithContext(ctx)
	g.Go(func() error { return srv.Run(gctx) })
	g.Go(func() error { s.watchRecording(gctx, time.Second); return nil })
	g.Go(func() error {
		err := data(gctx)
		if err != nil && !errors.Is(err, context.Canceled) {
			return err
		}
		return nil
	})
	err = g.Wait()
	if s.stats != nil {
		s.stats.flush()
	}
	if s.rec != nil {
		if cerr := s.rec.Close(); cerr != nil && err == nil {
			err = fmt.Errorf("close recording: %w", cerr)
		}
	}
	if errors.Is(err, context.Canceled) {
		return nil
	}
	return err
}

// watchRecording shows the recording's state on the page once a second, and
// logs once when it stops (disk full, unwritable path); the live view goes
// on. It returns when ctx ends.
func (s *session) watchRecording(ctx context.Context, every time.Duration) {
	if s.rec == nil {
		return
	}
	tk := time.NewTicker(every)
	defer tk.Stop()
	logged := false
	for {
		msgs, _ := s.rec.Committed()
		st := &pack.RecordingSnap{File: s.rec.Path(), State: "recording", Messages: msgs, Dropped: s.rec.Dropped()}
		if err := s.rec.Err(); err != nil {
			st.State, st.Error = "stopped", err.Error()
			if !logged {
				s.log.Error("recording stopped; the live view goes on", "file", s.rec.Path(), "err", err)
				logged = true
			}
		}
		s.eng.SetRecording(st)
		select {
		case <-ctx.Done():
			return
		case <-tk.C:
		}
	}
}
