package server

import (
	"encoding/json"
	"testing"

	"packwatch/pack"
)

func snapAt(t float64, v float64) *pack.Snapshot {
	n := pack.Num(v)
	return &pack.Snapshot{DataT: pack.Num(t), Packs: []pack.PackSnapshot{{ID: "a", Voltage: &n}}}
}

type histJSON struct {
	WindowS float64 `json:"window_s"`
	Packs   []struct {
		ID string     `json:"id"`
		T  []float64  `json:"t"`
		V  []*float64 `json:"voltage_v"`
		I  []*float64 `json:"current_a"`
	} `json:"packs"`
}

func decodeHist(t *testing.T, h *history) histJSON {
	t.Helper()
	var out histJSON
	if err := json.Unmarshal(h.marshal(), &out); err != nil {
		t.Fatalf("history JSON: %v\n%s", err, h.marshal())
	}
	return out
}

func TestHistory(t *testing.T) {
	for _, tc := range []struct {
		name   string
		times  []float64
		window float64
		wantN  int
		first  float64
		last   float64
	}{
		{"keeps the window", []float64{0, 1, 2, 3, 4, 5}, 3, 4, 2, 5},
		{"paused data time adds nothing", []float64{0, 1, 1, 1, 2}, 10, 3, 0, 2},
		{"a seek back starts afresh", []float64{10, 11, 12, 5, 6}, 100, 2, 5, 6},
	} {
		t.Run(tc.name, func(t *testing.T) {
			h := newHistory(tc.window)
			for _, x := range tc.times {
				h.add(snapAt(x, 48+x))
			}
			got := decodeHist(t, h)
			if len(got.Packs) != 1 {
				t.Fatalf("packs %d", len(got.Packs))
			}
			p := got.Packs[0]
			if len(p.T) != tc.wantN || p.T[0] != tc.first || p.T[len(p.T)-1] != tc.last {
				t.Errorf("t = %v, want %d points from %v to %v", p.T, tc.wantN, tc.first, tc.last)
			}
			if len(p.V) != len(p.T) || *p.V[len(p.V)-1] != 48+tc.last {
				t.Errorf("voltage %v", p.V)
			}
			if p.I[0] != nil {
				t.Errorf("missing current must be null, got %v", *p.I[0])
			}
		})
	}
}

// Long histories are thinned to at most maxHistoryPoints, keeping the newest.
func TestHistoryThinned(t *testing.T) {
	h := newHistory(600)
	for i := range 6000 {
		h.add(snapAt(float64(i)*0.1, 1))
	}
	p := decodeHist(t, h).Packs[0]
	if len(p.T) > maxHistoryPoints || len(p.T) < maxHistoryPoints/2 {
		t.Errorf("%d points, want at most %d and not far fewer", len(p.T), maxHistoryPoints)
	}
	if last := p.T[len(p.T)-1]; last != 599.9 {
		t.Errorf("newest point %v, want 599.9", last)
	}
}
