package analyze

import "math"

// ResampleByCharge turns voltage readings into voltage against charge at a
// fixed step. chT/chQ is the charge moved (Ah, non-decreasing) at the
// current readings' times; vT/vV are the voltage readings, each at its own
// time. Each voltage reading gets the charge interpolated to its time; the
// pairs are then interpolated linearly at Q = k·step for every k whose Q
// lies within the pairs. A pair whose charge is below an earlier one (regen
// inside a discharge) is skipped, so Q never goes back.
//
// Because the charge is taken at each reading's own time, the result does
// not depend on how the current varied: a voltage that is a function of
// charge alone comes back the same at any current profile.
func ResampleByCharge(chT, chQ, vT, vV []float64, step float64) (q, v []float64) {
	if len(chT) == 0 || len(vT) == 0 || step <= 0 {
		return nil, nil
	}
	pq, pv := chargePairs(chT, chQ, vT, vV, step/pairsPerStep)
	if len(pq) < 2 {
		return nil, nil
	}
	first := math.Ceil(pq[0]/step-1e-9) * step
	j := 0
	for g := first; g <= pq[len(pq)-1]+1e-12; g = first + float64(len(q))*step {
		for j+1 < len(pq) && pq[j+1] < g {
			j++
		}
		var val float64
		if j+1 < len(pq) {
			val = lerp(pq[j], pv[j], pq[j+1], pv[j+1], g)
		} else {
			val = pv[j]
		}
		q = append(q, g+0) // never −0
		if q[len(q)-1] == 0 {
			q[len(q)-1] = 0
		}
		v = append(v, val)
	}
	return q, v
}

// pairsPerStep: ResampleByCharge keeps at most this many readings per
// charge step (a fast bus sends far more; the curve is interpolated
// between neighbouring readings, so the others add nothing).
const pairsPerStep = 50

// chargePairs gives each voltage reading within the charge readings' span
// the charge interpolated to its own time, skipping readings whose charge
// falls below an earlier one, and readings less than minDq after the last
// one kept (the last reading is always kept). With minDq = 0 every reading
// counts.
func chargePairs(chT, chQ, vT, vV []float64, minDq float64) (pq, pv []float64) {
	if len(chT) == 0 {
		return nil, nil
	}
	ch := cursor{tr: &Trace{T: chT, V: chQ}}
	n := min(len(vT), 4096)
	pq = make([]float64, 0, n)
	pv = make([]float64, 0, n)
	top := math.Inf(-1)
	last := -1
	for k, t := range vT {
		if t < chT[0] || t > chT[len(chT)-1] {
			continue
		}
		qq, _ := ch.at(t)
		if qq < top {
			continue
		}
		top = qq
		if len(pq) > 0 && qq < pq[len(pq)-1]+minDq {
			last = k
			continue
		}
		pq = append(pq, qq)
		pv = append(pv, vV[k])
		last = -1
	}
	if last >= 0 { // the final reading, skipped as too close, still ends the curve
		qq, _ := ch.at(vT[last])
		pq = append(pq, qq)
		pv = append(pv, vV[last])
	}
	return pq, pv
}
