package analyze

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"testing"
)

// TestDCResistance checks the arithmetic of the published methods
// (REFERENCES.md), with packwatch's sign (positive charging):
//   - IEC 61960-3:2017 DC method (partial): It = 3.0 A, U1 = 3.8520 V at
//     0.2 It = 0.6 A, U2 = 3.7800 V at 1.0 It = 3.0 A (discharge) → 30.0 mΩ;
//   - HPPC, DOE/ID-11069 (INL 2003; details from memory): 3.700 → 3.550 V
//     at a 50 A discharge pulse → 3.00 mΩ; regen 3.690 → 3.795 V at 37.5 A
//     → 2.80 mΩ.
func TestDCResistance(t *testing.T) {
	cases := []struct {
		name           string
		v1, i1, v2, i2 float64
		want           float64 // mΩ
	}{
		{"IEC 61960-3 two levels", 3.8520, -0.6, 3.7800, -3.0, 30.0},
		{"HPPC discharge pulse", 3.700, 0, 3.550, -50, 3.00},
		{"HPPC regen pulse", 3.690, 0, 3.795, 37.5, 2.80},
	}
	for _, c := range cases {
		if got := DCResistance(c.v1, c.i1, c.v2, c.i2) * 1000; math.Abs(got-c.want) > 1e-9 {
			t.Errorf("%s: %.6f mΩ, want %.2f mΩ", c.name, got, c.want)
		}
	}
	if !math.IsNaN(DCResistance(3.7, 1, 3.6, 1)) {
		t.Error("no current change must give no resistance")
	}
}

// TestStepsPublishedLevels runs the same check values through step
// detection: a cell trace that holds U1 at I1 for 10 s, then U2 at I2, with
// voltage readings 300 ms out of phase with the current's.
func TestStepsPublishedLevels(t *testing.T) {
	cases := []struct {
		name                  string
		capAh, i1, u1, i2, u2 float64
		want                  float64 // mΩ
		method                string
	}{
		{"IEC 61960-3: 0.2 It then 1.0 It, It = 3 A", 3, -0.6, 3.8520, -3.0, 3.7800, 30.0, MethodTwoLevel},
		{"HPPC discharge pulse, 50 A", 100, 0, 3.700, -50, 3.550, 3.00, MethodPulse},
		{"HPPC regen pulse, 37.5 A", 100, 0, 3.690, 37.5, 3.795, 2.80, MethodPulse},
	}
	for _, c := range cases {
		s := &Session{Pack: PackInfo{Cells: 1, CapacityAh: c.capAh}, Cells: make([]Trace, 1)}
		for k := 0; k <= 300; k++ { // 30 s of current at 10 Hz; the step at 20 s
			tt := float64(k) / 10
			i := c.i1
			if tt >= 20 {
				i = c.i2
			}
			s.Current.Add(tt, i)
		}
		for k := 0; k < 30; k++ { // voltage at 1 Hz, 0.3 s after the whole seconds
			tt := float64(k) + 0.3
			v := c.u1
			if tt >= 20 {
				v = c.u2
			}
			s.Cells[0].Add(tt, v)
			s.PackV.Add(tt, v)
		}
		s.Finish()
		steps, rej := Steps(s, StepOptions{}, 0.02*c.capAh, func(float64) float64 { return math.NaN() })
		if len(steps) != 1 {
			t.Errorf("%s: %d steps (rejected %+v), want 1", c.name, len(steps), rej)
			continue
		}
		st := steps[0]
		if math.Abs(float64(st.R0)-c.want) > 1e-6 || math.Abs(float64(st.Cells[0].R0)-c.want) > 1e-6 {
			t.Errorf("%s: R0 %v / cell %v mΩ, want %.2f", c.name, st.R0, st.Cells[0].R0, c.want)
		}
		if st.Method != c.method {
			t.Errorf("%s: method %q, want %q", c.name, st.Method, c.method)
		}
		if math.Abs(float64(st.Delay)-0.3) > 1e-9 {
			t.Errorf("%s: R0 reading %v s after the step, want 0.3", c.name, st.Delay)
		}
	}
}

// TestStepRejections: too small, too short a steady current before, and a
// new current that does not last.
func TestStepRejections(t *testing.T) {
	build := func(levels [][2]float64) *Session { // (until t, current)
		s := &Session{Pack: PackInfo{Cells: 1, CapacityAh: 10}, Cells: make([]Trace, 1)}
		for k := 0; k <= 600; k++ {
			tt := float64(k) / 10
			i := 0.0
			for _, l := range levels {
				if tt < l[0] {
					i = l[1]
					break
				}
			}
			s.Current.Add(tt, i)
			s.PackV.Add(tt+0.05, 3.7+0.002*i)
			s.Cells[0].Add(tt+0.05, 3.7+0.002*i)
		}
		s.Finish()
		return s
	}
	cases := []struct {
		name   string
		levels [][2]float64
		reason string
	}{
		{"too small", [][2]float64{{20, 0}, {61, -0.7}}, "too small"},
		{"not steady before", [][2]float64{{15, 0}, {20, -5}, {61, -20}}, "too short: the current before"},
		{"too short after", [][2]float64{{20, 0}, {20.5, -20}, {61, 0}}, "too short: the new current"},
	}
	for _, c := range cases {
		s := build(c.levels)
		_, rej := Steps(s, StepOptions{}, 0.2, func(float64) float64 { return math.NaN() })
		found := false
		for _, r := range rej {
			found = found || len(r.Reason) >= len(c.reason) && r.Reason[:len(c.reason)] == c.reason
		}
		if !found {
			t.Errorf("%s: rejections %+v, want one starting %q", c.name, rej, c.reason)
		}
	}
}

// TestFiniteDQDV: REFERENCES.md finite differences, Q = 0, 0.1, 0.2, 0.3
// Ah with V = 3.50, 3.55, 3.58, 3.60 V → dQ/dV 2.0, 3.333, 5.0 Ah/V at
// 3.525, 3.565, 3.590 V (arithmetic of a difference quotient).
func TestFiniteDQDV(t *testing.T) {
	vm, d := FiniteDQDV([]float64{0, 0.1, 0.2, 0.3}, []float64{3.50, 3.55, 3.58, 3.60})
	wantV := []float64{3.525, 3.565, 3.590}
	wantD := []float64{2.0, 3.333, 5.0}
	if len(d) != 3 {
		t.Fatalf("%d values", len(d))
	}
	for i := range d {
		if math.Abs(vm[i]-wantV[i]) > 1e-9 || math.Abs(d[i]-wantD[i]) > 5e-4 {
			t.Errorf("point %d: %.4f Ah/V at %.4f V, want %.3f at %.3f", i, d[i], vm[i], wantD[i], wantV[i])
		}
	}
}

// logistic is the analytic curve of REFERENCES.md: V = E0 + (RT/F)·ln(x/(1−x)).
const (
	rtF  = 0.0256926 // RT/F at 298.15 K, V
	e0   = 3.7
	qmax = 3.0 // Ah
)

func logisticQV(n int) (q, v []float64) {
	for k := 1; k < n; k++ {
		x := float64(k) / float64(n)
		q = append(q, qmax*x)
		v = append(v, e0+rtF*math.Log(x/(1-x)))
	}
	return q, v
}

// TestICAAnalytic: for V = E0 + (RT/F)·ln(x/(1−x)), x = Q/Qmax, dQ/dV =
// Qmax·x(1−x)·F/(RT) peaks at V = E0 with Qmax·F/(4RT) = 29.1913 Ah/V for
// 3 Ah at 298.15 K, and the area over E0 ± 0.1 V is 2.88004 Ah, which the
// smoothing must preserve (REFERENCES.md; the method after Dubarry et al.,
// J. Power Sources 219 (2012), and the filter after Savitzky and Golay,
// Anal. Chem. 36 (1964), from memory).
func TestICAAnalytic(t *testing.T) {
	q, v := logisticQV(30000)
	vc, d := BinDQDV(q, v, 0.002)
	sm := SavitzkyGolay(d, 4)
	peak, at := 0.0, 0.0
	area, rawArea := 0.0, 0.0
	for k := range vc {
		if sm[k] > peak {
			peak, at = sm[k], vc[k]
		}
		if vc[k] > e0-0.1 && vc[k] < e0+0.1 {
			area += sm[k] * 0.002
			rawArea += d[k] * 0.002
		}
	}
	if math.Abs(peak-29.1913)/29.1913 > 0.005 {
		t.Errorf("peak %.4f Ah/V, want 29.1913 (0.5 %%)", peak)
	}
	if math.Abs(at-e0) > 0.002 {
		t.Errorf("peak at %.4f V, want %.1f", at, e0)
	}
	if math.Abs(rawArea-2.88004)/2.88004 > 0.001 || math.Abs(area-2.88004)/2.88004 > 0.001 {
		t.Errorf("area over E0 ± 0.1 V: binned %.5f, smoothed %.5f Ah, want 2.88004 (0.1 %%)", rawArea, area)
	}
	peaks := FindPeaks(vc, sm, 0.05)
	if len(peaks) != 1 || math.Abs(float64(peaks[0].V)-e0) > 0.002 {
		t.Errorf("peaks %+v, want one at %.1f V", peaks, e0)
	}
	// dV/dQ at x = 0.5: RT/F·4/Qmax = 0.0342568 V/Ah (REFERENCES.md)
	gq, gv := ResampleByCharge(q, q, q, v, 0.01) // voltage readings at their own charge
	for k := 1; k+1 < len(gq); k++ {
		if math.Abs(gq[k]-qmax/2) < 1e-9 {
			if got := (gv[k+1] - gv[k-1]) / (gq[k+1] - gq[k-1]); math.Abs(got-0.0342568) > 2e-5 {
				t.Errorf("dV/dQ at x = 0.5: %.7f V/Ah, want 0.0342568", got)
			}
		}
	}
}

// TestICANoiseSmoothing: readings quantised to 1 mV (as a BMS sends them)
// and binned at 5 mV still give the analytic peak within 3 % and the area
// within 0.5 % after smoothing.
func TestICANoiseSmoothing(t *testing.T) {
	q, v := logisticQV(6000)
	for k := range v {
		v[k] = math.Round(v[k]*1000) / 1000
	}
	vc, d := BinDQDV(q, v, 0.005)
	sm := SavitzkyGolay(d, 3)
	peak, area := 0.0, 0.0
	for k := range vc {
		peak = math.Max(peak, sm[k])
		if vc[k] > e0-0.1 && vc[k] < e0+0.1 {
			area += sm[k] * 0.005
		}
	}
	if math.Abs(peak-29.1913)/29.1913 > 0.03 {
		t.Errorf("peak %.3f, want 29.1913 within 3 %%", peak)
	}
	if math.Abs(area-2.88004)/2.88004 > 0.005 {
		t.Errorf("area %.5f, want 2.88004 within 0.5 %%", area)
	}
}

// TestResampleIndependentOfCurrent is a property test: when the voltage is
// a function of the charge alone, resampling by charge gives the same curve
// whatever the current did, with voltage readings at their own times
// (common practice, no source: the reason to plot against charge).
func TestResampleIndependentOfCurrent(t *testing.T) {
	f := func(q float64) float64 { return 3.0 + 0.05*q + 0.1*math.Sin(q) }
	var ref []float64
	for seed := uint64(1); seed <= 20; seed++ {
		rng := rand.New(rand.NewPCG(seed, 7))
		// current readings at irregular times, piecewise linear between
		// them (so the trapezoid is exact), 0.5–5 A, changing at random
		var ct, ci, cq []float64
		tt, q := 0.0, 0.0
		level := 0.5 + 4.5*rng.Float64()
		for q < 10.5 {
			ct, ci, cq = append(ct, tt), append(ci, level), append(cq, q)
			if rng.Float64() < 0.05 {
				level = 0.5 + 4.5*rng.Float64()
			}
			dt := 0.5 + rng.Float64()
			q += (ci[len(ci)-1] + level) / 2 * dt / 3600
			tt += dt
		}
		ct, ci, cq = append(ct, tt), append(ci, level), append(cq, q)
		s := &Session{}
		for k := range ct {
			s.Current.Add(ct[k], ci[k])
		}
		ch := CountCharge(s)
		// voltage readings at their own random times, from the exact charge
		exact := Trace{T: ct, V: cq}
		var vt, vv []float64
		for x := 0.0; x < tt; x += 0.2 + 0.6*rng.Float64() {
			qq, _ := exactCharge(&exact, ci, x)
			vt, vv = append(vt, x), append(vv, f(qq))
		}
		gq, gv := ResampleByCharge(ch.T, ch.Q, vt, vv, 1)
		if len(gq) < 10 {
			t.Fatalf("seed %d: %d points", seed, len(gq))
		}
		for k := range gq {
			if math.Abs(gv[k]-f(gq[k])) > 2e-4 {
				t.Errorf("seed %d: V(%.0f Ah) = %.5f, want %.5f", seed, gq[k], gv[k], f(gq[k]))
			}
		}
		if ref == nil {
			ref = gv
		}
		for k := 0; k < min(len(ref), len(gv)); k++ {
			if math.Abs(ref[k]-gv[k]) > 4e-4 {
				t.Errorf("seed %d: %.0f Ah differs from seed 1 by %.5f V", seed, gq[k], gv[k]-ref[k])
			}
		}
	}
}

// exactCharge integrates a piecewise-linear current exactly up to t.
func exactCharge(q *Trace, i []float64, t float64) (float64, bool) {
	k := q.Before(t)
	if k < 0 || k+1 >= q.Len() {
		return 0, false
	}
	t0, t1 := q.T[k], q.T[k+1]
	i0, i1 := i[k], i[k+1]
	x := t - t0
	return q.V[k] + (i0*x+(i1-i0)*x*x/(2*(t1-t0)))/3600, true
}

// TestCountCharge: REFERENCES.md: samples 10, 12, 14, 16 A at 1 s give 39
// A·s by the trapezoid; Plett (Vol. I ch. 2, from memory): Q = 50 Ah, z0 =
// 0.80, −25 A for 1800 s → z = 0.55. A gap adds nothing.
func TestCountCharge(t *testing.T) {
	s := &Session{}
	for k, i := range []float64{10, 12, 14, 16} {
		s.Current.Add(float64(k), i)
	}
	ch := CountCharge(s)
	if got := ch.Q[3] * 3600; math.Abs(got-39) > 1e-9 {
		t.Errorf("trapezoid %.6f A·s, want 39", got)
	}
	s = &Session{}
	for k := 0; k <= 1800; k++ {
		s.Current.Add(float64(k), -25)
	}
	ch = CountCharge(s)
	if z := 0.80 + ch.Q[1800]/50; math.Abs(z-0.55) > 1e-9 {
		t.Errorf("z = %.6f, want 0.550000", z)
	}
	s.Gaps = []float64{900.5}
	ch = CountCharge(s)
	if got := -ch.Q[1800] * 3600; math.Abs(got-25*1799) > 1e-6 {
		t.Errorf("with a gap: %.3f A·s, want %d (one second not integrated)", got, 25*1799)
	}
}

// TestKneeFormula: a curve falling 0.01 V/Ah to 80 Ah and 0.1 V/Ah after:
// by the rule (k = 3) the knee is at 80 Ah, 3.2 V; with k = 20 there is none.
func TestKneeFormula(t *testing.T) {
	var q, v []float64
	for k := 0; k <= 1000; k++ {
		x := float64(k) * 0.1
		y := 4.0 - 0.01*x
		if x > 80 {
			y = 3.2 - 0.1*(x-80)
		}
		q, v = append(q, x), append(v, y)
	}
	k := FindKnee(q, v, 3, 0)
	if !k.Found || math.Abs(k.V-3.2) > 0.03 || math.Abs(k.Q-80) > 1 {
		t.Errorf("knee %+v, want 80 Ah, 3.2 V", k)
	}
	if math.Abs(k.MedianSlope-0.01) > 1e-9 {
		t.Errorf("median slope %g, want 0.01 V/Ah", k.MedianSlope)
	}
	if k := FindKnee(q, v, 20, 0); k.Found {
		t.Errorf("k = 20 found a knee at %+v; the curve bends only 10×", k)
	}
}

// TestPrecharge: RC charging (circuit theory, REFERENCES.md): V = 48 V, R =
// 25 Ω, C = 2000 µF: τ = 0.050 s, 95 % at 0.149787 s. The close ratio is
// common practice, no source.
func TestPrecharge(t *testing.T) {
	for _, c := range []struct {
		closeAt   float64
		wantRatio float64
		flagged   bool
	}{
		{0.300, 1 - math.Exp(-0.295/0.05), false},
		{0.100, 1 - math.Exp(-0.095/0.05), true},
	} {
		s := &Session{}
		closeK := 40 + int(math.Round(c.closeAt/0.005))
		for k := 0; k < 200; k++ { // 1 s at 5 ms
			tt := float64(k) * 0.005
			s.PackV.Add(tt, 48)
			pre, link := 0.0, 0.0
			if k >= 40 {
				pre = 1
				link = 48 * (1 - math.Exp(-(tt-0.2)/0.05))
			}
			mn := 0.0
			if k >= closeK {
				mn, link = 1, 48
			}
			s.Precharge.Add(tt, pre)
			s.Main.Add(tt, mn)
			s.Link.Add(tt, link)
		}
		s.Finish()
		ev := PrechargeEvents(s, 0)
		if len(ev) != 1 {
			t.Fatalf("close at %.2f: %d events", c.closeAt, len(ev))
		}
		e := ev[0]
		if c.closeAt > 0.2 && math.Abs(float64(e.TimeToRatio)-0.149787) > 0.001 {
			t.Errorf("t95 %.6f s, want 0.149787 s", float64(e.TimeToRatio))
		}
		if math.Abs(float64(e.RatioAtClose)-c.wantRatio) > 1e-6 {
			t.Errorf("close at %.2f: ratio %.5f, want %.5f", c.closeAt, float64(e.RatioAtClose), c.wantRatio)
		}
		if (e.Flag != "") != c.flagged {
			t.Errorf("close at %.2f: flag %q", c.closeAt, e.Flag)
		}
	}
}

// TestBursts: a 100 A burst for 5 s on a steady 10 A draw; cells of 2 mΩ
// (Ohm's law, no source needed): sag 90 A × 2 mΩ = 0.18 V on each cell,
// 0.18 V more on cell 2 (4 mΩ), Ah 100 × 5/3600.
func TestBursts(t *testing.T) {
	s := &Session{Pack: PackInfo{Cells: 2, Sensors: 1, CapacityAh: 50}, Cells: make([]Trace, 2), Temps: make([]Trace, 1)}
	r := []float64{0.002, 0.004}
	for k := 0; k <= 1200; k++ {
		tt := float64(k) / 10
		i := -10.0
		if tt >= 60 && tt < 65 {
			i = -100
		}
		s.Current.Add(tt, i)
		var pv float64
		for c := range r {
			v := 3.7 + r[c]*i
			s.Cells[c].Add(tt+0.03, v)
			pv += v
		}
		s.PackV.Add(tt, pv)
		if k%10 == 0 {
			temp := 25.0
			if tt >= 60 {
				temp = 25 + math.Min(tt-60, 5)*0.4
			}
			s.Temps[0].Add(tt, temp)
		}
	}
	s.Finish()
	ch := CountCharge(s)
	bs := Bursts(s, ch, BurstOptions{}.withDefaults(s, 1))
	if len(bs) != 1 {
		t.Fatalf("%d bursts, want 1", len(bs))
	}
	b := bs[0]
	if b.MinCell != 2 || !near(float64(b.SagCellV), 90*0.004, 1e-9) || !near(float64(b.SagV), 90*0.006, 1e-9) {
		t.Errorf("min cell %d, cell sag %v, pack sag %v; want cell 2, 0.36 V, 0.54 V", b.MinCell, b.SagCellV, b.SagV)
	}
	if !near(float64(b.Ah), 100*5/3600.0, 0.003) {
		t.Errorf("Ah %v, want %.4f", b.Ah, 100*5/3600.0)
	}
	if !near(float64(b.TempRise[0]), 2, 1e-9) {
		t.Errorf("temperature rise %v, want 2 K", b.TempRise)
	}
	if !near(float64(b.RecoveryCellV), 3.7-0.04, 1e-9) {
		t.Errorf("recovery %v, want 3.66 V", b.RecoveryCellV)
	}
}

// TestImbalance: one cell loses 1 mV per minute against three steady ones.
func TestImbalance(t *testing.T) {
	s := &Session{Cells: make([]Trace, 4)}
	for k := 0; k <= 3600; k += 5 {
		tt := float64(k)
		for c := range s.Cells {
			v := 3.6
			if c == 1 {
				v -= tt / 60 * 0.001
			}
			s.Cells[c].Add(tt, v)
		}
	}
	im := CellImbalance(s)
	if !im.Cells[1].Drifting || im.Cells[0].Drifting || len(im.Flags) != 1 {
		t.Errorf("drift flags %+v", im.Cells)
	}
	if !near(float64(im.MaxSpread), 0.060, 1e-6) {
		t.Errorf("max spread %v, want 0.060 V", im.MaxSpread)
	}
}

// TestNumJSON: a missing number is null (RFC 8259 §6 has no NaN).
func TestNumJSON(t *testing.T) {
	b, err := json.Marshal(struct{ A, B Num }{Num(math.NaN()), Num(3.25)})
	if err != nil || string(b) != `{"A":null,"B":3.25}` {
		t.Errorf("%s %v", b, err)
	}
}

// TestGapSplitsSegments: a gap in the data ends a segment, and no charge is
// counted across it (README "Timing and trips": never integrate across a gap).
func TestGapSplitsSegments(t *testing.T) {
	s := &Session{Pack: PackInfo{CapacityAh: 10}}
	for k := 0; k <= 2000; k++ {
		tt := float64(k)
		if k > 1000 {
			tt += 500 // the data resumes 500 s later
		}
		s.Current.Add(tt, -2)
	}
	s.Gaps = []float64{1200}
	s.Finish()
	ch := CountCharge(s)
	segs := Segments(s, ch, SegmentOptions{})
	if len(segs) != 2 || segs[0].Kind != Discharge || segs[1].Kind != Discharge {
		t.Fatalf("segments %+v, want two discharges", segs)
	}
	if got := -ch.Q[len(ch.Q)-1] * 3600; math.Abs(got-2*1999) > 1e-6 {
		t.Errorf("counted %.3f A·s, want %d (nothing across the gap)", got, 2*1999)
	}
}

// TestDerivedPackVoltage: without pack.voltage, the pack is the sum of the
// cells and its resistance the sum of theirs.
func TestDerivedPackVoltage(t *testing.T) {
	s := &Session{Pack: PackInfo{Cells: 2, CapacityAh: 10}, Cells: make([]Trace, 2)}
	r := []float64{0.010, 0.020}
	for k := 0; k <= 400; k++ {
		tt := float64(k) / 10
		i := 0.0
		if tt >= 20 {
			i = -10
		}
		s.Current.Add(tt, i)
		for c := range r {
			s.Cells[c].Add(tt+0.04, 3.7+r[c]*i)
		}
	}
	s.Finish()
	if !s.PackVDerived || s.PackV.Empty() {
		t.Fatal("pack voltage not derived")
	}
	steps, rej := Steps(s, StepOptions{}, 0.2, func(float64) float64 { return math.NaN() })
	if len(steps) != 1 {
		t.Fatalf("%d steps, rejected %+v", len(steps), rej)
	}
	if got := float64(steps[0].R0); math.Abs(got-30) > 1e-6 || steps[0].InterconnectR0.Valid() {
		t.Errorf("pack R0 %.4f mΩ (want 30, the cells' sum), interconnect %v (want none)", got, steps[0].InterconnectR0)
	}
}
