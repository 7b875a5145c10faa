package main

import (
	"context"
	"path/filepath"
	"testing"
	"time"

	"packwatch/config"
	"packwatch/decode"
	"packwatch/pack"
	"packwatch/record"
	"packwatch/sim"
)

// TestRecordingStopsLiveGoesOn: a recording that cannot grow (a full disk,
// imitated by the writer's size limit) stops with its reason on the page's
// snapshot, while the live view keeps updating.
func TestRecordingStopsLiveGoesOn(t *testing.T) {
	p, m, err := builtinPack(0, 1)
	if err != nil {
		t.Fatal(err)
	}
	db := filepath.Join(t.TempDir(), "full.db")
	rec, err := record.Create(db, record.Meta{Tool: "packwatch", Start: time.Now()}, record.Options{MaxBytes: 64 << 10, CommitEvery: 20 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	s, err := newSession([]*config.Profile{p}, []*decode.Map{m}, "simulated", rec, quiet)
	if err != nil {
		t.Fatal(err)
	}
	simulator, err := sim.New(m, sim.Options{Speed: 2000, Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var out syncBuffer
	done := make(chan error, 1)
	go func() {
		done <- runSession(ctx, s, &serveFlags{addr: "127.0.0.1:0"}, "simulated", func(ctx context.Context) error { return simulator.Run(ctx, s) }, &out)
	}()
	url := waitURL(t, &out)
	stopped := waitState(t, url, func(s *pack.Snapshot) bool {
		return s.Recording != nil && s.Recording.State == "stopped" && s.Recording.Error != ""
	})
	waitState(t, url, func(s *pack.Snapshot) bool { return float64(s.DataT) > float64(stopped.DataT)+10 })
	cancel()
	<-done // the session ends cleanly or with the recorder's error; either way it ends
}
