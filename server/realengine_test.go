package server

import (
	"context"
	"encoding/json"
	"net/http"
	"testing"
	"time"

	"packwatch/config"
	"packwatch/config/examples"
	"packwatch/decode"
	"packwatch/pack"
	"packwatch/sim"
)

// TestRealEngineWithSimulator serves the real engine fed by the simulator
// through the real decode path (the example profile): /api/state carries
// every cell, /api/bus is the engine's own bus view (found through
// BusViewer), and a cell forced past its high limit raises an active
// alarm that the Origin-checked POST acknowledges.
func TestRealEngineWithSimulator(t *testing.T) {
	p, err := config.Parse("buoy-winch.toml", examples.BuoyWinch)
	if err != nil {
		t.Fatal(err)
	}
	m, err := decode.Compile(p)
	if err != nil {
		t.Fatal(err)
	}
	eng := pack.NewEngine(pack.Options{Mode: "simulated"})
	if err := eng.AddPack("winch", m, nil); err != nil {
		t.Fatal(err)
	}
	s, err := sim.New(m, sim.Options{Speed: 1, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Run(ctx, eng) }()
	defer func() {
		cancel()
		if err := <-done; err != nil {
			t.Errorf("sim: %v", err)
		}
	}()
	s.Pause()
	if err := s.Advance(ctx, 20*time.Second); err != nil {
		t.Fatal(err)
	}
	rs := startServer(t, Options{Engine: eng, Mode: "simulated", Tick: 20 * time.Millisecond})

	get := func(path string, v any) int {
		resp, err := http.Get(rs.base + path)
		if err != nil {
			t.Fatalf("GET %s: %v", path, err)
		}
		defer resp.Body.Close()
		if v != nil {
			if err := json.NewDecoder(resp.Body).Decode(v); err != nil {
				t.Fatalf("decode %s: %v", path, err)
			}
		}
		return resp.StatusCode
	}
	var st pack.Snapshot
	waitFor(t, "a snapshot", 10*time.Second, func() bool { return get("/api/state", nil) == 200 })
	get("/api/state", &st)
	if st.Mode != "simulated" || len(st.Packs) != 1 || len(st.Packs[0].Cells) != p.Pack.Cells {
		t.Fatalf("state: mode %q, %d packs", st.Mode, len(st.Packs))
	}
	for _, c := range st.Packs[0].Cells {
		if c.V == nil {
			t.Errorf("cell %d has no value after 20 s of data", c.N)
		}
	}
	var bv pack.BusView
	if code := get("/api/bus", &bv); code != 200 || len(bv.Sources) == 0 {
		t.Fatalf("/api/bus: %d, %d sources", code, len(bv.Sources))
	}
	ids := 0
	for _, src := range bv.Sources {
		ids += len(src.IDs)
	}
	if ids == 0 {
		t.Error("bus view lists no CAN IDs")
	}

	// Push cell 5 past the high limit and let data time run.
	if err := s.ForceCell(5, p.Limits.CellHighV+0.15); err != nil {
		t.Fatal(err)
	}
	if err := s.Advance(ctx, 10*time.Second); err != nil {
		t.Fatal(err)
	}
	var alarm pack.AlarmSnap
	waitFor(t, "the cell-high alarm", 10*time.Second, func() bool {
		var cur pack.Snapshot
		get("/api/state", &cur)
		for _, a := range cur.Packs[0].Alarms {
			if a.Limit == "cell_high" && a.Active && a.Level == "trip" {
				alarm = a
				return true
			}
		}
		return false
	})
	req, _ := http.NewRequest("POST", rs.base+"/api/packs/winch/alarms/"+jsonUint(alarm.ID)+"/ack", nil)
	req.Header.Set("Origin", rs.base)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Fatalf("ack: %d", resp.StatusCode)
	}
	waitFor(t, "the alarm acknowledged", 10*time.Second, func() bool {
		var cur pack.Snapshot
		get("/api/state", &cur)
		for _, a := range cur.Packs[0].Alarms {
			if a.ID == alarm.ID {
				return a.Acked
			}
		}
		return false
	})
}

func jsonUint(n uint64) string { b, _ := json.Marshal(n); return string(b) }
