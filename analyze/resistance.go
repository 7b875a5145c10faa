package analyze

import (
	"fmt"
	"math"
)

// DCResistance is the DC internal resistance from two operating points:
// R = (V2 − V1)/(I2 − I1) in ohms, with I positive charging, so that R is
// positive for a step in either direction. It is the arithmetic of the IEC
// 61960-3 two-level method and of the HPPC pulse resistance.
func DCResistance(v1, i1, v2, i2 float64) float64 {
	if i2 == i1 {
		return math.NaN()
	}
	return (v2 - v1) / (i2 - i1)
}

// StepOptions tune the detection of current steps; zero means the default.
type StepOptions struct {
	// MinStepA: a step smaller than this is rejected as too small (default
	// 10 % of the rated capacity in A, at least 0.5 A); candidates start at
	// half of it.
	MinStepA float64
	// SettleS: how long the current must have been steady before the step
	// (default 10 s).
	SettleS float64
	// SettleFrac: steady means the current's range over SettleS is within
	// this fraction of |ΔI| (default 0.1).
	SettleFrac float64
	// NoiseFrac: the step is too noisy when the standard deviation of the
	// pack voltage over SettleS exceeds this fraction of its instant change
	// (default 0.2).
	NoiseFrac float64
	// MaxDelayS: a voltage reading more than this after the step does not
	// give an instant resistance (default 2 s).
	MaxDelayS float64
}

func (o StepOptions) withDefaults(capAh float64) StepOptions {
	if o.MinStepA <= 0 {
		o.MinStepA = math.Max(0.5, 0.1*capAh)
	}
	if o.SettleS <= 0 {
		o.SettleS = 10
	}
	if o.SettleFrac <= 0 {
		o.SettleFrac = 0.1
	}
	if o.NoiseFrac <= 0 {
		o.NoiseFrac = 0.2
	}
	if o.MaxDelayS <= 0 {
		o.MaxDelayS = 2
	}
	return o
}

// Method names for a step.
const (
	MethodTwoLevel = "two current levels (after IEC 61960-3)"
	MethodPulse    = "pulse from rest (after the HPPC procedure)"
)

// Resist is a resistance at a step: instant (R0: the first voltage reading
// after the current settled at its new level), after 1 s and after 10 s, mΩ.
type Resist struct {
	Cell  int `json:"cell,omitempty"`
	R0    Num `json:"r0_mohm"`
	R1s   Num `json:"r1s_mohm"`
	R10s  Num `json:"r10s_mohm"`
	Delay Num `json:"delay_s"` // how long after the step the R0 reading came
	// Outlier is set when this cell's R0 stands out from the others.
	Outlier bool `json:"outlier,omitempty"`
}

// Step is one accepted current step with its resistances.
type Step struct {
	T       Num      `json:"t_s"`
	Method  string   `json:"method"`
	IBefore Num      `json:"i_before_a"`
	IAfter  Num      `json:"i_after_a"`
	DeltaA  Num      `json:"delta_a"`
	HoldS   Num      `json:"hold_s"`
	Resist           // the pack's, inlined: r0_mohm, r1s_mohm, r10s_mohm
	Cells   []Resist `json:"cells"`
	SOCPct  Num      `json:"soc_pct"`
	TempC   Num      `json:"temp_c"`
	// CellSumR0 is the sum of the cells' R0, InterconnectR0 the pack's R0
	// minus it: the share of busbars, joints and wiring, mΩ.
	CellSumR0      Num      `json:"cell_sum_r0_mohm"`
	InterconnectR0 Num      `json:"interconnect_r0_mohm"`
	Flags          []string `json:"flags,omitempty"`
}

// Rejected is a candidate step that gave no resistance, with the reason.
type Rejected struct {
	T      Num    `json:"t_s"`
	DeltaA Num    `json:"delta_a"`
	Reason string `json:"reason"`
}

// Steps finds the current steps of a session and measures the DC
// resistance at each, for the pack and each cell. soc gives the state of
// charge at a time (NaN when unknown).
func Steps(s *Session, opt StepOptions, deadband float64, soc func(t float64) float64) (acc []Step, rej []Rejected) {
	opt = opt.withDefaults(s.Pack.CapacityAh)
	tr := &s.Current
	n := tr.Len()
	lastCand := math.Inf(-1)
	for k := 1; k < n; k++ {
		di := tr.V[k] - tr.V[k-1]
		if math.Abs(di) < opt.MinStepA/2 {
			continue
		}
		// a ramp over a few readings counts once: from its first reading
		if tr.T[k]-lastCand < 1 {
			lastCand = tr.T[k]
			continue
		}
		lastCand = tr.T[k]
		st, reason := measureStep(s, k, opt, deadband)
		if reason != "" {
			rej = append(rej, Rejected{T: Num(tr.T[k]), DeltaA: Num(tr.V[k] - tr.V[k-1]), Reason: reason})
			continue
		}
		st.SOCPct = Num(soc(tr.T[k-1]))
		st.TempC = Num(s.meanTemp(tr.T[k-1], tr.T[k-1]))
		acc = append(acc, st)
	}
	return acc, rej
}

// measureStep measures the step between current readings k−1 and k, or
// says why it cannot.
func measureStep(s *Session, k int, opt StepOptions, deadband float64) (Step, string) {
	tr := &s.Current
	tb, ta := tr.T[k-1], tr.T[k]
	// the current before must have been steady for SettleS
	est := math.Abs(tr.V[k] - tr.V[k-1])
	band := opt.SettleFrac * est
	m := k - 1
	for m > 0 && math.Abs(tr.V[m-1]-tr.V[k-1]) <= band && !s.gapBetween(tr.T[m-1], tr.T[m]) {
		m--
	}
	if steady := tb - tr.T[m]; steady < opt.SettleS-1e-9 {
		return Step{}, fmt.Sprintf("too short: the current before was steady for %.1f s (at least %.0f s)", steady, opt.SettleS)
	}
	i0, _ := tr.Window(tb-opt.SettleS, tb)
	sum := 0.0
	for q := i0; q <= k-1; q++ {
		sum += tr.V[q]
	}
	ib := sum / float64(k-i0)
	// the new level: of the readings in the first 0.5 s, the one farthest
	// from the old level (a BMS may ramp its reading over a few frames)
	iaT := ta
	ia := tr.V[k]
	for m := k + 1; m < tr.Len() && tr.T[m] <= ta+0.5; m++ {
		if math.Abs(tr.V[m]-ib) > math.Abs(ia-ib) {
			ia = tr.V[m]
		}
	}
	di := ia - ib
	if math.Abs(di) < opt.MinStepA {
		return Step{}, fmt.Sprintf("too small: |ΔI| %.2f A is below %.2f A", math.Abs(di), opt.MinStepA)
	}
	// how long the new level held
	hold := 0.0
	for m := k; m < tr.Len(); m++ {
		if math.Abs(tr.V[m]-ia) > 0.25*math.Abs(di) || (m > k && s.gapBetween(tr.T[m-1], tr.T[m])) {
			break
		}
		hold = tr.T[m] - iaT
	}
	if hold < 1 {
		return Step{}, fmt.Sprintf("too short: the new current held %.2f s (at least 1 s)", hold)
	}
	st := Step{T: Num(ta), IBefore: Num(ib), IAfter: Num(ia), DeltaA: Num(di), HoldS: Num(hold)}
	st.Method = MethodTwoLevel
	if math.Abs(ib) <= deadband {
		st.Method = MethodPulse
	}
	ch := stepChannel{s: s, tb: tb, ta: ta, hold: hold, opt: opt}
	pr, noise, ok := ch.measure(&s.PackV)
	if !ok {
		return Step{}, "no pack voltage reading close enough to the step"
	}
	if noise {
		return Step{}, fmt.Sprintf("too noisy: the pack voltage before varied more than %.0f %% of its change at the step", 100*opt.NoiseFrac)
	}
	st.Resist = pr
	var sum0 float64
	all := len(s.Cells) > 0
	st.Cells = []Resist{}
	for c := range s.Cells {
		r, _, ok := ch.measure(&s.Cells[c])
		r.Cell = c + 1
		if !ok {
			r = Resist{Cell: c + 1, R0: none, R1s: none, R10s: none, Delay: none}
		}
		if !r.R0.Valid() {
			all = false
		}
		sum0 += float64(r.R0)
		st.Cells = append(st.Cells, r)
	}
	st.CellSumR0, st.InterconnectR0 = none, none
	switch {
	case all && s.PackVDerived:
		// the pack voltage is the sum of the cells taken at the current's
		// times: its resistances are the sums of the cells' own
		st.Resist = sumResist(st.Cells)
	case all:
		st.CellSumR0 = Num(sum0)
		st.InterconnectR0 = Num(float64(st.R0) - sum0)
	}
	st.Flags = outliers(st.Cells, st.InterconnectR0)
	return st, ""
}

// sumResist adds the cells' resistances (a missing one makes the sum missing).
func sumResist(cells []Resist) Resist {
	var r Resist
	for _, c := range cells {
		r.R0 += c.R0
		r.R1s += c.R1s
		r.R10s += c.R10s
		r.Delay = Num(math.Max(float64(r.Delay), float64(c.Delay)))
	}
	return r
}

// stepChannel measures one voltage channel at a step.
type stepChannel struct {
	s      *Session
	tb, ta float64
	hold   float64
	opt    StepOptions
}

// measure returns the channel's resistances; noise is true when the
// channel's voltage before the step was too noisy for its change.
func (c stepChannel) measure(v *Trace) (r Resist, noise, ok bool) {
	cur := &c.s.Current
	r = Resist{R0: none, R1s: none, R10s: none, Delay: none}
	b := v.Before(c.tb)
	if b < 0 || v.T[b] < c.tb-c.opt.SettleS {
		return r, false, false
	}
	vb := v.V[b]
	ib, _ := cur.At(v.T[b])
	// the first reading once the current is known at its new level
	a := v.Before(c.ta) + 1
	for a < v.Len() && v.T[a] < c.ta {
		a++
	}
	if a >= v.Len() || v.T[a]-c.ta > c.opt.MaxDelayS || v.T[a]-c.ta > c.hold {
		return r, false, false
	}
	ia, _ := cur.At(v.T[a])
	r.R0 = mohm(DCResistance(vb, ib, v.V[a], ia))
	r.Delay = Num(v.T[a] - c.ta)
	// noise: standard deviation of the channel before the step
	i0, i1 := v.Window(c.tb-c.opt.SettleS, c.tb+1e-9)
	if i1-i0 >= 3 {
		var m, m2 float64
		for _, x := range v.V[i0:i1] {
			m += x
		}
		m /= float64(i1 - i0)
		for _, x := range v.V[i0:i1] {
			m2 += (x - m) * (x - m)
		}
		sd := math.Sqrt(m2 / float64(i1-i0-1))
		noise = sd > c.opt.NoiseFrac*math.Abs(v.V[a]-vb)
	}
	at := func(d float64) Num {
		t := c.ta + d
		if d > c.hold*1.05+1e-9 {
			return none // the new current did not last
		}
		t = math.Min(t, c.ta+c.hold) // a pulse a reading short of d: its last reading
		j := v.Before(t)
		if j < 0 || j+1 >= v.Len() || v.T[j+1]-v.T[j] > c.opt.MaxDelayS {
			return none
		}
		vv := lerp(v.T[j], v.V[j], v.T[j+1], v.V[j+1], t)
		if v.T[j+1] > c.ta+c.hold {
			// the next reading comes after the new current ended: use the last one within it
			t, vv = v.T[j], v.V[j]
		}
		ii, _ := cur.At(t)
		return mohm(DCResistance(vb, ib, vv, ii))
	}
	r.R1s = at(1)
	r.R10s = at(10)
	return r, noise, true
}

// ResistanceSummary is the median of each resistance over the accepted
// steps, for the pack and each cell (mΩ), and how many steps there were.
type ResistanceSummary struct {
	Steps          int      `json:"steps"`
	Pack           Resist   `json:"pack"`
	Cells          []Resist `json:"cells"`
	InterconnectR0 Num      `json:"interconnect_r0_mohm"`
}

// SummariseSteps takes the medians over steps (missing values left out).
func SummariseSteps(steps []Step) ResistanceSummary {
	out := ResistanceSummary{Steps: len(steps), Cells: []Resist{}}
	med := func(get func(Step) Num) Num {
		var x []float64
		for _, s := range steps {
			if v := get(s); v.Valid() {
				x = append(x, float64(v))
			}
		}
		if len(x) == 0 {
			return none
		}
		return Num(median(x))
	}
	out.Pack = Resist{R0: med(func(s Step) Num { return s.R0 }), R1s: med(func(s Step) Num { return s.R1s }),
		R10s: med(func(s Step) Num { return s.R10s }), Delay: med(func(s Step) Num { return s.Delay })}
	out.InterconnectR0 = med(func(s Step) Num { return s.InterconnectR0 })
	nc := 0
	for _, s := range steps {
		nc = max(nc, len(s.Cells))
	}
	for c := 0; c < nc; c++ {
		cell := func(get func(Resist) Num) func(Step) Num {
			return func(s Step) Num {
				if c < len(s.Cells) {
					return get(s.Cells[c])
				}
				return none
			}
		}
		out.Cells = append(out.Cells, Resist{Cell: c + 1,
			R0:    med(cell(func(r Resist) Num { return r.R0 })),
			R1s:   med(cell(func(r Resist) Num { return r.R1s })),
			R10s:  med(cell(func(r Resist) Num { return r.R10s })),
			Delay: med(cell(func(r Resist) Num { return r.Delay }))})
	}
	outliers(out.Cells, out.InterconnectR0)
	return out
}

// outliers flags cells whose R0 stands out from the others (more than
// 1.5 × the median and more than 3 robust standard deviations above it),
// and an interconnect share larger than the median cell's R0.
func outliers(cells []Resist, inter Num) []string {
	var vals []float64
	for _, c := range cells {
		if c.R0.Valid() {
			vals = append(vals, float64(c.R0))
		}
	}
	var flags []string
	if len(vals) >= 3 {
		med := median(vals)
		dev := make([]float64, len(vals))
		for i, v := range vals {
			dev[i] = math.Abs(v - med)
		}
		mad := 1.4826 * median(dev)
		for i := range cells {
			r := float64(cells[i].R0)
			if cells[i].R0.Valid() && r > 1.5*med && r-med > 3*mad {
				cells[i].Outlier = true
				flags = append(flags, fmt.Sprintf("cell %d: R0 %.2f mΩ against a median of %.2f mΩ", cells[i].Cell, r, med))
			}
		}
		if inter.Valid() && float64(inter) > med && med > 0 {
			flags = append(flags, fmt.Sprintf("interconnect: %.2f mΩ of the pack's R0 is outside the cells, more than a typical cell (%.2f mΩ): check the joints and busbars", float64(inter), med))
		}
	}
	return flags
}

// medianSample bounds the work of median: longer slices are sampled at a
// regular stride (the level of a current or a slope, not an exact order
// statistic, is what is needed).
const medianSample = 20001

// median of a slice (a sorted copy, or of a regular sample of a long one).
func median(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	var c []float64
	if len(x) > medianSample {
		stride := (len(x) + medianSample - 1) / medianSample
		c = make([]float64, 0, len(x)/stride+1)
		for i := 0; i < len(x); i += stride {
			c = append(c, x[i])
		}
	} else {
		c = append([]float64(nil), x...)
	}
	sortFloats(c)
	m := len(c) / 2
	if len(c)%2 == 1 {
		return c[m]
	}
	return (c[m-1] + c[m]) / 2
}
