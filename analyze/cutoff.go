package analyze

import (
	"fmt"
	"math"
)

// ccCurve resamples one voltage channel of a discharge run against the
// charge removed since full, keeping only readings taken at the run's
// steady current (within 10 % of its median, and so 30 s before),
// so that bursts and their recovery do not bend the curve.
func ccCurve(s *Session, ch *Charge, r Run, tr *Trace, step float64, level float64, moved []float64) (q, v []float64) {
	i, j := s.Current.Window(r.From, r.To+1e-9)
	if j-i < 2 {
		return nil, nil
	}
	vt, vv := steadyReadings(s, tr, r.From, r.To, r.ccFrom, level, 30)
	return ResampleByCharge(s.Current.T[i:j], moved, vt, vv, step)
}

// steadyMinGapS thins a fast channel: a steady reading this soon after the
// last one kept adds nothing to a curve taken at a steady current.
const steadyMinGapS = 0.05

// steadyReadings returns the readings of tr in [from, to] taken at the
// steady current level (within 10 % of it, and so settleS before); readings
// before settleFrom are all kept (the rest before a discharge).
func steadyReadings(s *Session, tr *Trace, from, to, settleFrom, level, settleS float64) (vt, vv []float64) {
	a, b := tr.Window(from, to+1e-9)
	cur := &s.Current
	ci := cur.search(settleFrom) // next current reading to look at
	lastOff := math.Inf(-1)      // time of the latest off-level current reading
	tol := 0.1 * math.Abs(level)
	now := cursor{tr: cur}
	vt = make([]float64, 0, min(b-a, 1<<16))
	vv = make([]float64, 0, min(b-a, 1<<16))
	lastKept := math.Inf(-1)
	for k := a; k < b; k++ {
		t := tr.T[k]
		for ci < cur.Len() && cur.T[ci] <= t {
			if math.Abs(cur.V[ci]-level) > tol {
				lastOff = cur.T[ci]
			}
			ci++
		}
		if t >= settleFrom {
			if i1, _ := now.at(t); math.Abs(i1-level) > tol || t-lastOff < settleS {
				continue
			}
		}
		if t-lastKept < steadyMinGapS && k != b-1 {
			continue
		}
		lastKept = t
		vt = append(vt, t)
		vv = append(vv, tr.V[k])
	}
	return vt, vv
}

// dischargeLevel is the median current of a run's discharge readings.
func dischargeLevel(s *Session, r Run) float64 {
	i, j := s.Current.Window(r.ccFrom, r.To+1e-9)
	x := make([]float64, 0, j-i)
	for _, v := range s.Current.V[i:j] {
		if v < 0 {
			x = append(x, v)
		}
	}
	return median(x)
}

// kneeAndCutoff finds the knee of the pack and of every cell on the
// discharge run, names the weakest cell and suggests a cutoff.
func kneeAndCutoff(s *Session, ch *Charge, r Run, opt Options, rep *Report) {
	level := dischargeLevel(s, r)
	if math.IsNaN(level) {
		return
	}
	i, j := s.Current.Window(r.ccFrom, r.To+1e-9)
	if !steadyCurrent(s.Current.V[i:j], 0.1, 0.5) {
		rep.Warnings = append(rep.Warnings, "the discharge was not at a constant current for most of its length: the knee uses only the readings at its usual current")
	}
	step := math.Max(r.Ah/1000, 1e-4)
	cells := float64(max(s.Pack.Cells, 1))
	i0, j0 := s.Current.Window(r.From, r.To+1e-9)
	moved := make([]float64, j0-i0)
	for k := i0; k < j0; k++ {
		moved[k-i0] = ch.Q[i0] - ch.Q[k]
	}
	pq, pv := ccCurve(s, ch, r, &s.PackV, step, level, moved)
	pk := FindKnee(pq, pv, opt.KneeK, 0)
	if pk.Found {
		rep.KneeAh = Num(pk.Q)
		rep.KneeVPerCell = Num(pk.V / cells)
	}
	crate := math.NaN()
	if s.Pack.CapacityAh > 0 {
		crate = math.Abs(level) / s.Pack.CapacityAh
	}
	rep.CutoffCRate = Num(crate)
	rep.CutoffTempC = r.MeanTemp
	// cells: the weakest reaches its knee first
	weak, weakQ, weakV := 0, math.Inf(1), math.NaN()
	for c := range s.Cells {
		q, v := ccCurve(s, ch, r, &s.Cells[c], step, level, moved)
		k := FindKnee(q, v, opt.KneeK, 0)
		rep.CellKnees = append(rep.CellKnees, k)
		if k.Found && k.Q < weakQ {
			weak, weakQ, weakV = c+1, k.Q, k.V
		}
	}
	if weak == 0 && len(s.Cells) > 0 {
		// no cell knee: the weakest is the lowest at the end
		low := math.Inf(1)
		for c := range s.Cells {
			if v, ok := s.Cells[c].At(r.To); ok && v < low {
				low, weak = v, c+1
			}
		}
	}
	if weak > 0 {
		w := weak
		rep.WeakestCell = &w
	}
	switch {
	case !math.IsInf(weakQ, 1):
		rep.SuggestedCutoffVPerCell = Num(weakV)
		rep.AhBelowCutoff = Num(r.Ah - weakQ)
		if len(pq) > 0 {
			tr := Trace{T: pq, V: pv}
			v, _ := tr.At(weakQ)
			rep.SuggestedCutoffPackV = Num(v)
		}
	case pk.Found:
		rep.SuggestedCutoffVPerCell = Num(pk.V / cells)
		rep.SuggestedCutoffPackV = Num(pk.V)
		rep.AhBelowCutoff = Num(r.Ah - pk.Q)
	default:
		rep.Warnings = append(rep.Warnings, "no knee found on the discharge: it may not have gone deep enough")
		return
	}
	rep.CutoffText = fmt.Sprintf("the last %.1f Ah are below %.2f V per cell at %s, %s", float64(rep.AhBelowCutoff),
		float64(rep.SuggestedCutoffVPerCell), cRateText(crate), tempText(float64(r.MeanTemp)))
	if rep.WeakestCell != nil {
		rep.CutoffText += fmt.Sprintf("; cell %d reaches its knee first", *rep.WeakestCell)
	}
}

func cRateText(c float64) string {
	if math.IsNaN(c) {
		return "an unknown C-rate"
	}
	return fmt.Sprintf("%.2g C", c)
}

func tempText(t float64) string {
	if math.IsNaN(t) {
		return "unknown temperature"
	}
	return fmt.Sprintf("%.0f °C", t)
}
