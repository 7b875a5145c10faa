package analyze

import (
	"fmt"
	"math"
)

// Imbalance is how far the cells spread apart over the session.
type Imbalance struct {
	// Series: the spread (highest − lowest cell) at regular times.
	T         []Num `json:"t_s"`
	SpreadV   []Num `json:"spread_v"`
	MaxSpread Num   `json:"max_spread_v"`
	MaxAt     Num   `json:"max_spread_at_s"`
	// Cells: each cell's deviation from the average.
	Cells []CellDrift `json:"cells"`
	Flags []string    `json:"flags,omitempty"`
}

// CellDrift is one cell's deviation from the average of the cells, V.
type CellDrift struct {
	Cell     int  `json:"cell"`
	MeanDev  Num  `json:"mean_dev_v"`
	StartDev Num  `json:"start_dev_v"` // mean over the first tenth of the session
	EndDev   Num  `json:"end_dev_v"`   // mean over the last tenth
	Drift    Num  `json:"drift_v"`     // end − start
	Drifting bool `json:"drifting,omitempty"`
}

// CellImbalance samples every cell at up to 500 regular times.
func CellImbalance(s *Session) Imbalance {
	out := Imbalance{T: []Num{}, SpreadV: []Num{}, Cells: []CellDrift{}}
	out.MaxSpread, out.MaxAt = none, none
	nc := len(s.Cells)
	if nc < 2 {
		return out
	}
	t0, t1 := math.Inf(1), math.Inf(-1)
	for c := range s.Cells {
		if s.Cells[c].Empty() {
			return out
		}
		t0 = math.Min(t0, s.Cells[c].T[0])
		t1 = math.Max(t1, s.Cells[c].T[s.Cells[c].Len()-1])
	}
	steps := 500
	dt := math.Max((t1-t0)/float64(steps), 1)
	cs := make([]cursor, nc)
	for c := range cs {
		cs[c].tr = &s.Cells[c]
	}
	var dev [][]float64 // [sample][cell]
	best := -1.0
	for t := t0; t <= t1+1e-9; t += dt {
		if s.gapNear(t, dt) {
			continue
		}
		row := make([]float64, nc)
		lo, hi, sum := math.Inf(1), math.Inf(-1), 0.0
		for c := range cs {
			v, _ := cs[c].at(t)
			row[c] = v
			lo, hi, sum = math.Min(lo, v), math.Max(hi, v), sum+v
		}
		mean := sum / float64(nc)
		for c := range row {
			row[c] -= mean
		}
		dev = append(dev, row)
		out.T = append(out.T, Num(t))
		out.SpreadV = append(out.SpreadV, Num(hi-lo))
		if hi-lo > best {
			best = hi - lo
			out.MaxSpread, out.MaxAt = Num(best), Num(t)
		}
	}
	ns := len(dev)
	if ns == 0 {
		return out
	}
	tenth := max(ns/10, 1)
	var absDrift []float64
	for c := 0; c < nc; c++ {
		var m, a, b float64
		for k := 0; k < ns; k++ {
			m += dev[k][c]
		}
		for k := 0; k < tenth; k++ {
			a += dev[k][c]
			b += dev[ns-1-k][c]
		}
		d := CellDrift{Cell: c + 1, MeanDev: Num(m / float64(ns)), StartDev: Num(a / float64(tenth)), EndDev: Num(b / float64(tenth))}
		d.Drift = d.EndDev - d.StartDev
		absDrift = append(absDrift, math.Abs(float64(d.Drift)))
		out.Cells = append(out.Cells, d)
	}
	// a cell drifts when its drift stands out from the others' (more than
	// 10 mV and 3 robust standard deviations from their median)
	drifts := make([]float64, len(out.Cells))
	for c := range out.Cells {
		drifts[c] = float64(out.Cells[c].Drift)
	}
	med := median(drifts)
	for c := range absDrift {
		absDrift[c] = math.Abs(drifts[c] - med)
	}
	mad := 1.4826 * median(absDrift)
	for c := range out.Cells {
		d := float64(out.Cells[c].Drift)
		if math.Abs(d-med) > 0.010 && math.Abs(d-med) > 3*mad {
			out.Cells[c].Drifting = true
			out.Flags = append(out.Flags, fmt.Sprintf("cell %d drifted %+.0f mV from the average over the session", c+1, d*1000))
		}
	}
	return out
}

// gapNear reports whether a gap lies within dt of t.
func (s *Session) gapNear(t, dt float64) bool {
	return s.gapBetween(t-dt, t+dt)
}
