package metrics

import (
	"testing"
	"time"

	"packwatch/pack"
)

// Trips are counted as they happen, and the counters keep them after the
// alarms are acknowledged and leave the list. The trip rule is the
// profile's (PROFILE-SPEC.md "State and timing"): past a limit for
// trip_after_ms (1 s in the example) trips; each excursion here lasts 3 s.
func TestTripCounters(t *testing.T) {
	h := NewHandler(Options{})
	r := newRig(t, h.Observe)
	r.run(3*time.Second, nil)
	x := scrape(t, h, promUA)
	for _, lim := range []string{"cell_high", "cell_low", "spread", "temp_high", "temp_low", "charge_current", "discharge_current"} {
		if v, ok := x.find(t, "packwatch_trips_total", "pack", packA, "limit", lim); !ok || v != 0 {
			t.Errorf("before any trip: trips_total{limit=%s} %v (%v), want 0", lim, v, ok)
		}
	}

	// Two excursions of A's cell 1 to 2.90 V (low limit 3.00 V; 0.8 V under
	// the others, past the 0.25 V spread limit too), each acknowledged and
	// cleared before the next.
	for i := 0; i < 2; i++ {
		r.a.cells[0] = 2.90
		r.run(3*time.Second, nil)
		r.a.cells[0] = 3.70
		r.run(5*time.Second, nil) // clear_after 3 s
		r.e.AckAll(packA)
		r.run(time.Second, nil)
		if n := len(r.last.Packs[0].Alarms); n != 0 {
			t.Fatalf("excursion %d: %d alarms left after clearing and acknowledging", i+1, n)
		}
	}
	// One of B's temperature sensors reads 160 °C, outside its plausible
	// range [-40, 120]: a sensor fault, not a temperature.
	r.b.tempRaw[0] = 200
	r.run(time.Second, nil)

	x = scrape(t, h, promUA)
	want := map[string]float64{"cell_low": 2, "spread": 2, "cell_high": 0, "temp_high": 0, "temp_low": 0, "discharge_current": 0, "charge_current": 0}
	for lim, w := range want {
		if v, ok := x.find(t, "packwatch_trips_total", "pack", packA, "limit", lim); !ok || v != w {
			t.Errorf("A trips_total{limit=%s} %v (%v), want %v", lim, v, ok, w)
		}
	}
	if v, _ := x.find(t, "packwatch_sensor_faults_total", "pack", packA); v != 0 {
		t.Errorf("A sensor faults %v, want 0", v)
	}
	if v, _ := x.find(t, "packwatch_sensor_faults_total", "pack", packB); v != 1 {
		t.Errorf("B sensor faults %v, want 1", v)
	}
	if v, _ := x.find(t, "packwatch_trips_total", "pack", packB, "limit", "cell_low"); v != 0 {
		t.Errorf("B cell_low trips %v, want 0", v)
	}
	if v, _ := x.find(t, "packwatch_alarms_active", "pack", packB, "level", "fault"); v != 1 {
		t.Errorf("B active faults %v, want 1", v)
	}
	if v, _ := x.find(t, "packwatch_alarms_unacknowledged", "pack", packB); v != 1 {
		t.Errorf("B unacknowledged alarms %v, want 1", v)
	}
	if v, _ := x.find(t, "packwatch_alarms_active", "pack", packA, "level", "trip"); v != 0 {
		t.Errorf("A active trips %v, want 0", v)
	}
}

// A new engine numbers its alarms from 1 again; counting goes on.
func TestTripsAcrossEngineRestart(t *testing.T) {
	snap := func(seq uint64, ids ...uint64) *pack.Snapshot {
		p := pack.PackSnapshot{ID: "p"}
		for _, id := range ids {
			p.Alarms = append(p.Alarms, pack.AlarmSnap{ID: id, Limit: "cell_low", Level: "trip", Active: true})
		}
		return &pack.Snapshot{Seq: seq, Packs: []pack.PackSnapshot{p}}
	}
	h := NewHandler(Options{})
	h.Observe(snap(10, 1, 2))
	h.Observe(snap(11, 1, 2)) // the same alarms again: not counted twice
	h.Observe(snap(1, 1))     // a new engine: its alarm 1 is new
	if got := h.trips.byPack["p"].ByLim["cell_low"]; got != 3 {
		t.Errorf("cell_low trips %d, want 3", got)
	}
}
