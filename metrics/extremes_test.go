package metrics

import (
	"testing"
	"time"

	"packwatch/pack"
)

// A 2 s sag between two scrapes 15 s apart: the latest snapshot at the
// second scrape shows the pack recovered, but the extremes since the
// previous scrape keep the sag. The example: a 15 s scrape interval
// otherwise misses a 2 s sag.
func TestExtremesSinceScrape(t *testing.T) {
	h := NewHandler(Options{})
	r := newRig(t, h.Observe)
	r.run(5*time.Second, nil)
	x := scrape(t, h, promUA) // first scrape: the window starts here
	if v, _ := x.find(t, "packwatch_cell_voltage_lowest_volts", "pack", packA); v != 3.700 {
		t.Errorf("first scrape: lowest cell %v, want 3.700 (the latest snapshot)", v)
	}

	// 5 s later, a 2 s sag on pack A: cell 4 at 3.310 V under 250 A
	// discharge; then 8 s of recovery, longer than any reading's staleness.
	r.run(5*time.Second, nil)
	r.a.cells[3], r.a.amps = 3.310, -250
	r.run(2*time.Second, nil)
	r.a.cells[3], r.a.amps = 3.700, -18
	r.run(8*time.Second, nil)
	if cs := r.last.Packs[0].CellStats; cs.Min == nil || float64(*cs.Min) != 3.700 {
		t.Fatalf("latest snapshot: lowest cell %v, want the recovered 3.700", cs.Min)
	}

	// Someone runs curl in between: its first scrape sees only the latest
	// snapshot, and it must not empty Prometheus's window.
	c := scrape(t, h, "curl/8.0")
	if v, _ := c.find(t, "packwatch_cell_voltage_lowest_volts", "pack", packA); v != 3.700 {
		t.Errorf("curl: lowest cell %v, want 3.700", v)
	}

	x = scrape(t, h, promUA)
	want := []struct {
		name, pack string
		v          float64
	}{
		{"packwatch_cell_voltage_lowest_volts", packA, 3.310},
		{"packwatch_cell_voltage_highest_volts", packA, 3.710},
		{"packwatch_pack_current_lowest_amperes", packA, -250},
		{"packwatch_pack_current_highest_amperes", packA, -18},
		// B was steady: 3.938 to 3.950 V, +20 A.
		{"packwatch_cell_voltage_lowest_volts", packB, 3.938},
		{"packwatch_cell_voltage_highest_volts", packB, 3.950},
		{"packwatch_pack_current_lowest_amperes", packB, 20},
		{"packwatch_pack_current_highest_amperes", packB, 20},
	}
	for _, w := range want {
		if v, ok := x.find(t, w.name, "pack", w.pack); !ok || !near(v, w.v, 1e-9) {
			t.Errorf("second scrape: %s{pack=%s} = %v (%v), want %v", w.name, w.pack, v, ok, w.v)
		}
	}
	// The current value itself shows no sag: that is why the extremes exist.
	if v, _ := x.find(t, "packwatch_pack_current_amperes", "pack", packA); v != -18 {
		t.Errorf("current %v, want -18", v)
	}

	// A scrape right after, with no tick between: the window holds the
	// latest snapshot alone, not the sag again and not nothing.
	x = scrape(t, h, promUA)
	if v, ok := x.find(t, "packwatch_cell_voltage_lowest_volts", "pack", packA); !ok || v != 3.700 {
		t.Errorf("third scrape: lowest cell %v (%v), want 3.700", v, ok)
	}
	if v, ok := x.find(t, "packwatch_pack_current_lowest_amperes", "pack", packA); !ok || v != -18 {
		t.Errorf("third scrape: lowest current %v (%v), want -18", v, ok)
	}
}

// A stale current is not an extreme: a source that goes silent must not
// hold its last value in the window.
func TestExtremesIgnoreStale(t *testing.T) {
	h := NewHandler(Options{})
	r := newRig(t, h.Observe)
	r.run(3*time.Second, nil)
	scrape(t, h, promUA)
	// B's current and voltage frame stops; its last value (+20 A) goes
	// stale after 3 × 50 ms.
	r.b.noPower = true
	r.run(3*time.Second, nil)
	x := scrape(t, h, promUA)
	if v, ok := x.find(t, "packwatch_pack_current_highest_amperes", "pack", packB); !ok || v != 20 {
		t.Errorf("highest current %v (%v), want 20 from before it went silent", v, ok)
	}
	x = scrape(t, h, promUA)
	if v, ok := x.find(t, "packwatch_pack_current_highest_amperes", "pack", packB); ok {
		t.Errorf("highest current %v exposed for a window with only stale current", v)
	}
	if v, ok := x.find(t, "packwatch_pack_current_amperes", "pack", packB); ok {
		t.Errorf("stale current %v exposed", v)
	}
}

func TestWindowEviction(t *testing.T) {
	ws := newWindows(2)
	s := &pack.Snapshot{Packs: []pack.PackSnapshot{{ID: "p"}}}
	ws.take("a", s)
	ws.take("b", s)
	ws.take("a", s)
	ws.take("c", s) // evicts b, the least recently scraped
	if len(ws.byKey) != 2 || ws.byKey["b"] != nil || ws.byKey["a"] == nil || ws.byKey["c"] == nil {
		t.Errorf("windows %v, want a and c", ws.byKey)
	}
}
