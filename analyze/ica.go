package analyze

import "math"

// FiniteDQDV is the plain finite-difference incremental capacity of
// readings (q, v): ΔQ/ΔV between neighbours, at the mid voltage. Pairs with
// equal voltage give +Inf and are left out.
func FiniteDQDV(q, v []float64) (vm, d []float64) {
	for i := 1; i < len(q); i++ {
		dv := v[i] - v[i-1]
		if dv == 0 {
			continue
		}
		vm = append(vm, (v[i]+v[i-1])/2)
		d = append(d, (q[i]-q[i-1])/dv)
	}
	return vm, d
}

// BinDQDV bins charge on a uniform voltage grid: the charge moved between
// two neighbouring readings is shared among the voltage bins the pair spans,
// in proportion to the voltage each covers (all of it to one bin when the
// voltage did not change), and each bin's charge over its width is dQ/dV.
// Bins are [k·dv, (k+1)·dv); the result is at the bin centres, in Ah/V,
// always positive (charge or discharge). Binning never divides by a small
// ΔV, and the total charge, the area under the curve, is kept exactly.
func BinDQDV(q, v []float64, dv float64) (vc, d []float64) {
	if len(q) < 2 || dv <= 0 {
		return nil, nil
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, x := range v {
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	k0 := int(math.Floor(lo/dv + 1e-9))
	nb := int(math.Floor(hi/dv+1e-9)) - k0 + 1
	if nb <= 0 || nb > 1e6 {
		return nil, nil
	}
	bins := make([]float64, nb)
	bin := func(x float64) int {
		b := int(math.Floor(x/dv+1e-9)) - k0
		return min(max(b, 0), nb-1)
	}
	for i := 1; i < len(q); i++ {
		dq := math.Abs(q[i] - q[i-1])
		a, b := v[i-1], v[i]
		if a > b {
			a, b = b, a
		}
		ba, bb := bin(a), bin(b)
		if ba == bb || b == a {
			bins[ba] += dq
			continue
		}
		for k := ba; k <= bb; k++ {
			e0 := math.Max(a, float64(k+k0)*dv)
			e1 := math.Min(b, float64(k+k0+1)*dv)
			if e1 > e0 {
				bins[k] += dq * (e1 - e0) / (b - a)
			}
		}
	}
	vc = make([]float64, nb)
	d = make([]float64, nb)
	for k := range bins {
		vc[k] = (float64(k+k0) + 0.5) * dv
		d[k] = bins[k] / dv
	}
	return vc, d
}

// SavitzkyGolay smooths y with a quadratic Savitzky–Golay filter over
// 2m+1 points (Savitzky and Golay, Anal. Chem. 36, 1964): the centre value
// of the least-squares parabola through the window. Its weights sum to one,
// so the area under the curve is kept away from the ends; near the ends the
// window shrinks symmetrically.
func SavitzkyGolay(y []float64, m int) []float64 {
	out := make([]float64, len(y))
	n := len(y)
	for i := range y {
		h := min(m, i, n-1-i)
		if h < 2 {
			out[i] = y[i]
			continue
		}
		hf := float64(h)
		den := (2*hf + 1) * (4*hf*hf + 4*hf - 3)
		var s float64
		for j := -h; j <= h; j++ {
			jf := float64(j)
			s += (3*(3*hf*hf+3*hf-1) - 15*jf*jf) / den * y[i+j]
		}
		out[i] = s
	}
	return out
}

// Peak is a local maximum of a smoothed curve.
type Peak struct {
	V      Num `json:"v"`      // voltage (per cell for the pack)
	Height Num `json:"height"` // dQ/dV at the peak, Ah/V
	// Prominence is how far it stands above the higher of the lowest points
	// between it and a higher peak on either side, Ah/V.
	Prominence Num `json:"prominence"`
}

// FindPeaks lists the local maxima of y (at x) whose prominence is at least
// minFrac of the largest value.
func FindPeaks(x, y []float64, minFrac float64) []Peak {
	top := 0.0
	for _, v := range y {
		top = math.Max(top, v)
	}
	var out []Peak
	for i := 1; i+1 < len(y); i++ {
		if !(y[i] > y[i-1] && y[i] >= y[i+1]) {
			continue
		}
		left := y[i]
		for j := i - 1; j >= 0 && y[j] <= y[i]; j-- {
			left = math.Min(left, y[j])
		}
		right := y[i]
		for j := i + 1; j < len(y) && y[j] <= y[i]; j++ {
			right = math.Min(right, y[j])
		}
		prom := y[i] - math.Max(left, right)
		if prom >= minFrac*top && prom > 0 {
			out = append(out, Peak{V: Num(x[i]), Height: Num(y[i]), Prominence: Num(prom)})
		}
	}
	return out
}

// ICAOptions tune incremental capacity; zero means the default.
type ICAOptions struct {
	// BinV is the voltage bin per cell (default 0.005 V).
	BinV float64
	// SmoothPoints is the Savitzky–Golay window in bins, odd (default 9).
	SmoothPoints int
	// WarnC: above this C-rate the result is marked as of little meaning
	// (default 0.2, C/5); RefuseC: above it there is no result (default 1).
	WarnC, RefuseC float64
	// MinPeakFrac: peaks less prominent than this fraction of the highest
	// value are not listed (default 0.05).
	MinPeakFrac float64
}

func (o ICAOptions) withDefaults() ICAOptions {
	if o.BinV <= 0 {
		o.BinV = 0.005
	}
	if o.SmoothPoints < 3 {
		o.SmoothPoints = 9
	}
	if o.WarnC <= 0 {
		o.WarnC = 0.2
	}
	if o.RefuseC <= 0 {
		o.RefuseC = 1
	}
	if o.MinPeakFrac <= 0 {
		o.MinPeakFrac = 0.05
	}
	return o
}

// ICA is incremental capacity and differential voltage for one
// constant-current run (a charge's taper left out), on the mean cell
// voltage (pack voltage over the cell count).
type ICA struct {
	Kind    SegmentKind `json:"kind"`
	From    Num         `json:"from_s"`
	To      Num         `json:"to_s"`
	MeanA   Num         `json:"mean_a"`
	CRate   Num         `json:"c_rate"`
	TempC   Num         `json:"temp_c"`
	Method  string      `json:"method"`
	Warning string      `json:"warning,omitempty"`
	Peaks   []Peak      `json:"peaks"`
	// V, DQDV: dQ/dV per cell-voltage bin; Q, DVDQ: dV/dQ per cell on the
	// charge grid.
	V    []Num `json:"v"`
	DQDV []Num `json:"dqdv_ah_per_v"`
	Q    []Num `json:"ah"`
	DVDQ []Num `json:"dvdq_v_per_ah"`
}

// icaMethod names the smoothing in reports.
func icaMethod(o ICAOptions) string {
	return "charge binned on a " + ftoa(o.BinV*1000) + " mV grid per cell, then a quadratic Savitzky–Golay filter over " + itoa(o.SmoothPoints) + " bins; dV/dQ by centred differences on the charge grid with the same filter"
}

// icaSettleS: after a change of current, readings are left out of the
// incremental capacity this long, for the cells' slow relaxation.
const icaSettleS = 300

// RunICA computes incremental capacity and differential voltage for a run.
// It returns ok false (with the reason in Warning) when the current is too
// high for the result to mean anything.
func RunICA(s *Session, ch *Charge, r Run, opt ICAOptions, stepAh float64) (ICA, bool) {
	opt = opt.withDefaults()
	res := ICA{Kind: r.Kind, From: Num(r.ccFrom), To: Num(r.ccTo), MeanA: Num(r.MeanA), TempC: Num(r.MeanTemp), Method: icaMethod(opt)}
	cells := float64(max(s.Pack.Cells, 1))
	i, j := s.Current.Window(r.ccFrom, r.ccTo+1e-9)
	if j-i < 3 {
		return res, false
	}
	level := median(s.Current.V[i:j])
	res.MeanA = Num(level)
	crate := math.NaN()
	if s.Pack.CapacityAh > 0 {
		crate = math.Abs(level) / s.Pack.CapacityAh
	}
	res.CRate = Num(crate)
	if crate > opt.RefuseC {
		res.Warning = "refused: the current (" + ftoa(crate) + " C) is far above C/5; incremental capacity means little at this rate"
		return res, false
	}
	if crate > opt.WarnC {
		res.Warning = "the current (" + ftoa(crate) + " C) is above about C/5: peaks are blurred and shifted by the cells' resistance"
	}
	if !steadyCurrent(s.Current.V[i:j], 0.1, 0.9) {
		if res.Warning != "" {
			res.Warning += "; "
		}
		res.Warning += "the current was not constant over the run: only the readings at its usual current are used"
	}
	q := make([]float64, j-i)
	for k := i; k < j; k++ {
		q[k-i] = math.Abs(ch.Q[k] - ch.Q[i])
	}
	vt, vv := steadyReadings(s, &s.PackV, r.ccFrom, r.ccTo, r.ccFrom, level, icaSettleS)
	for k := range vv {
		vv[k] /= cells
	}
	pq, pv := chargePairs(s.Current.T[i:j], q, vt, vv, stepAh/pairsPerStep)
	vc, d := BinDQDV(pq, pv, opt.BinV)
	d = SavitzkyGolay(d, opt.SmoothPoints/2)
	res.V, res.DQDV = nums(vc), nums(d)
	res.Peaks = FindPeaks(vc, d, opt.MinPeakFrac)
	// dV/dQ on the charge grid
	if stepAh > 0 {
		gq, gv := ResampleByCharge(s.Current.T[i:j], q, vt, vv, stepAh)
		if len(gq) >= 3 {
			dd := make([]float64, len(gq))
			for k := range gq {
				lo, hi := max(k-1, 0), min(k+1, len(gq)-1)
				dd[k] = (gv[hi] - gv[lo]) / (gq[hi] - gq[lo])
			}
			res.Q, res.DVDQ = nums(gq), nums(SavitzkyGolay(dd, opt.SmoothPoints/2))
		}
	}
	return res, true
}

// steadyCurrent reports whether at least frac of the readings lie within
// tol of the median.
func steadyCurrent(x []float64, tol, frac float64) bool {
	if len(x) == 0 {
		return false
	}
	med := median(x)
	in := 0
	for _, v := range x {
		if math.Abs(v-med) <= tol*math.Abs(med) {
			in++
		}
	}
	return float64(in) >= frac*float64(len(x))
}
