package pack

import (
	"math"
)

// floorTo rounds t down to a multiple of step (t may be negative).
func floorTo(t, step int64) int64 {
	r := t % step
	if r < 0 {
		r += step
	}
	return t - r
}

// tick runs the aggregate checks at the grid point of data time at or before
// t (a multiple of the aggregate period), so the result does not depend on
// how messages were batched or when snapshots were taken. Once a second of
// data time it also samples the trends, the temperature rise and the
// source rates.
func (ps *packState) tick(t int64, ids *uint64) {
	at := floorTo(t, ps.aggPeriod)
	if at < ps.nextSec-secondNs {
		ps.nextSec = at // data time stepped back: restart the second grid
	}
	ps.computeAgg(at)
	a := &ps.agg
	ps.stepAgg(LimSpread, a.spread, 0, at, ids)
	ps.stepAgg(LimDeviation, a.dev, a.devCell, at, ids)
	ps.stepAgg(LimTempSpread, a.tspread, 0, at, ids)
	if at >= ps.nextSec {
		ps.secondTick(at)
		ps.stepAgg(LimTempRise, a.rise, a.riseSensor, at, ids)
		ps.nextSec = floorTo(at, secondNs) + secondNs
	}
	ps.socTick(at)
	ps.nextAgg = at + ps.aggPeriod
}

func (ps *packState) stepAgg(l LimitID, v float64, subj int32, t int64, ids *uint64) {
	ci := ps.aggCheck[l]
	if ci < 0 {
		return
	}
	c := &ps.checks[ci]
	c.value, c.subj = v, subj
	m := nan
	if !math.IsNaN(v) {
		m = ps.lim[l].margin(v)
	}
	ps.stepCheck(c, m, t, ids)
}

// computeAgg derives the cell and temperature aggregates from the fresh
// readings at data time t.
func (ps *packState) computeAgg(t int64) {
	a := emptyAgg()
	a.t = t
	a.rise, a.riseSensor = ps.agg.rise, ps.agg.riseSensor
	a.min, a.max = math.Inf(1), math.Inf(-1)
	sum := 0.0
	for i, s := range ps.cellSlot {
		if !ps.fresh(s, t) {
			continue
		}
		v := ps.v.V[s]
		a.n++
		sum += v
		if v < a.min {
			a.min, a.minCell = v, int32(i+1)
		}
		if v > a.max {
			a.max, a.maxCell = v, int32(i+1)
		}
	}
	if a.n == 0 {
		a.min, a.max = nan, nan
	} else {
		a.sum = sum
		a.avg = sum / float64(a.n)
		a.spread = a.max - a.min
		a.dev = 0
		for i, s := range ps.cellSlot {
			if !ps.fresh(s, t) {
				continue
			}
			if d := math.Abs(ps.v.V[s] - a.avg); d > a.dev || a.devCell == 0 {
				a.dev, a.devCell = d, int32(i+1)
			}
		}
	}
	a.tmin, a.tmax = math.Inf(1), math.Inf(-1)
	for i, s := range ps.tempSlot {
		if isAmbient(ps.tempRole[i]) || !ps.fresh(s, t) {
			continue
		}
		v := ps.v.V[s]
		a.tn++
		if v < a.tmin {
			a.tmin, a.tminSensor = v, int32(i+1)
		}
		if v > a.tmax {
			a.tmax, a.tmaxSensor = v, int32(i+1)
		}
	}
	if a.tn == 0 {
		a.tmin, a.tmax = nan, nan
	} else {
		a.tspread = a.tmax - a.tmin
	}
	ps.agg = a
}

// secondTick samples the trends, works out the fastest temperature rise
// over the trend window and the per-source message and error-frame rates.
func (ps *packState) secondTick(t int64) {
	a := &ps.agg
	cur := nan
	if ps.fresh(ps.curSlot, t) {
		cur = ps.v.V[ps.curSlot]
	}
	for i, v := range [numTrends]float64{a.max, a.min, a.spread, a.dev, a.tmax, a.tmin, a.tspread, cur} {
		ps.trends[i].Push(t, v)
	}
	a.rise, a.riseSensor = nan, 0
	for i, s := range ps.tempSlot {
		if s < 0 {
			continue
		}
		v := nan
		if ps.fresh(s, t) {
			v = ps.v.V[s]
		}
		ps.tempTrend[i].Push(t, v)
		if isAmbient(ps.tempRole[i]) || math.IsNaN(v) {
			continue
		}
		if sl, ok := ps.tempTrend[i].Slope(t); ok && (math.IsNaN(a.rise) || sl*60 > a.rise) {
			a.rise, a.riseSensor = sl*60, int32(i+1)
		}
	}
	if dt := t - ps.prevT; ps.prevT != 0 && dt > 0 {
		for i := range ps.v.Src {
			sc := &ps.v.Src[i]
			ps.rateHz[i] = float64(sc.Messages-ps.prevMsgs[i]) * 1e9 / float64(dt)
			ps.errRate[i] = float64(sc.ErrorFrames-ps.prevErrs[i]) * 1e9 / float64(dt)
		}
	}
	for i := range ps.v.Src {
		ps.prevMsgs[i], ps.prevErrs[i] = ps.v.Src[i].Messages, ps.v.Src[i].ErrorFrames
	}
	ps.prevT = t
}

// socTick applies the start rules of the counted state of charge.
func (ps *packState) socTick(t int64) {
	s := &ps.soc
	a := &ps.agg
	capAh := ps.prof.Pack.CapacityAh
	avg := a.avg
	cellsKnown := a.n == len(ps.cellSlot) && a.n > 0
	chem := ps.prof.Pack.Chemistry
	net := ps.counter.NetAs
	if !s.anchored {
		// No start yet: a rough figure from the rest table, marked uncertain.
		if cellsKnown {
			s.anchor(SOCFromRest(chem, avg)/100, net, true)
		}
		return
	}
	switch s.mode {
	case socRest:
		if ps.curSlot < 0 {
			// Nothing to count with: the rest table is all there is.
			if cellsKnown {
				s.anchor(SOCFromRest(chem, avg)/100, net, true)
			}
			return
		}
		if s.uncertain && cellsKnown && s.resting && ps.fresh(ps.curSlot, t) && t-s.restSince >= RestNs {
			s.anchor(SOCFromRest(chem, avg)/100, net, false)
		}
	case socFull:
		if !ps.fresh(ps.curSlot, t) || math.IsNaN(a.max) {
			return
		}
		i := ps.v.V[ps.curSlot]
		iEnd := endCRate * capAh
		full := ps.fullCellV(t)
		if i > iEnd && a.max >= full-0.05 {
			s.taper = true
		}
		if s.taper && i <= iEnd && a.max >= full-0.1 {
			s.anchor(1, net, false)
			s.taper = false
		}
	}
}
