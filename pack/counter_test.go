package pack

import (
	"math"
	"testing"
)

const sec = int64(1e9)

// feed adds current readings at a fixed step and returns the counter.
func feed(c *Counter, t0, step int64, amps ...float64) int64 {
	t := t0
	for _, a := range amps {
		c.Add(t, a, nan)
		t += step
	}
	return t - step
}

// REFERENCES.md, "State of charge by coulomb counting": samples 10, 12, 14,
// 16 A at 1 s give 39 A·s by the trapezoid rule (36 A·s by left rectangles).
// Trapezoid rule: any numerical analysis text (common practice, no source).
func TestTrapezoid(t *testing.T) {
	tests := []struct {
		name    string
		amps    []float64
		in, out float64
	}{
		{"charging ramp", []float64{10, 12, 14, 16}, 39, 0},
		{"discharging ramp", []float64{-10, -12, -14, -16}, 0, 39},
		// A line from +10 to −10 A over 1 s crosses zero at 0.5 s: 2.5 A·s each way.
		{"zero crossing split", []float64{10, -10}, 2.5, 2.5},
		// From +4 to −12 A: crossing at 0.25 s: in 4·0.25/2 = 0.5, out 12·0.75/2 = 4.5.
		{"asymmetric crossing", []float64{4, -12}, 0.5, 4.5},
		// Dead-band 0.1 A: 0.05 A counts as 0, so 0→2 A is a 1 A·s triangle.
		{"dead-band", []float64{0.05, 2}, 1, 0},
	}
	for _, tc := range tests {
		c := NewCounter(0.1, 1, 0)
		feed(&c, 0, sec, tc.amps...)
		if math.Abs(c.InAs-tc.in) > 1e-9 || math.Abs(c.OutAs-tc.out) > 1e-9 {
			t.Errorf("%s: in %.6f out %.6f A·s, want %.6f %.6f", tc.name, c.InAs, c.OutAs, tc.in, tc.out)
		}
	}
}

// G. L. Plett, Battery Management Systems Vol. I (2015) ch. 2 [memory for
// chapter and equation]: z[k+1] = z[k] + η·i·Δt/Q. Check values from
// REFERENCES.md.
func TestCoulombCountingPlett(t *testing.T) {
	// Q = 50 Ah, z0 = 0.80, −25 A for 1800 s → 0.550000.
	c := NewCounter(0.1, 0.99, 0)
	end := feed(&c, 0, sec, repeat(-25, 1801)...)
	z := SOCAfter(0.80, c.NetAs, 50)
	if math.Abs(z-0.55) > 1e-9 {
		t.Fatalf("after −25 A for 1800 s: z = %.9f, want 0.550000", z)
	}
	// Then +10 A for 3600 s with η = 0.99 → 0.748000. The step from −25 to
	// +10 A is two readings at the same instant.
	feed(&c, end, sec, repeat(10, 3601)...)
	z = SOCAfter(0.80, c.NetAs, 50)
	if math.Abs(z-0.748) > 1e-9 {
		t.Fatalf("then +10 A for 3600 s at η 0.99: z = %.9f, want 0.748000", z)
	}
	if math.Abs(c.InAs-36000) > 1e-6 || math.Abs(c.OutAs-45000) > 1e-6 {
		t.Errorf("in %.3f out %.3f A·s, want 36000 and 45000 (no efficiency on the raw counts)", c.InAs, c.OutAs)
	}

	// A 180 Ah pack at −18 A for 30 min → −9 Ah → 5 % of capacity.
	c = NewCounter(0.1, 0.995, 0)
	feed(&c, 0, 10*sec, repeat(-18, 181)...)
	if ah := c.OutAs / 3600; math.Abs(ah-9) > 1e-9 {
		t.Errorf("−18 A for 30 min: %.6f Ah out, want 9", ah)
	}
	if dz := 100 * (SOCAfter(0.5, c.NetAs, 180) - 0.5); math.Abs(dz+5) > 1e-9 {
		t.Errorf("−9 Ah of 180 Ah: ΔSOC %.6f %%, want −5", dz)
	}
}

func TestCounterGap(t *testing.T) {
	tests := []struct {
		name string
		run  func(c *Counter)
		want float64 // A·s out
		gaps int
	}{
		{"no gap", func(c *Counter) { feed(c, 0, sec, -10, -10, -10) }, 20, 0},
		{"break between readings", func(c *Counter) {
			feed(c, 0, sec, -10, -10)
			c.Break()
			feed(c, 100*sec, sec, -10, -10)
		}, 20, 1},
		{"interval longer than MaxGapNs", func(c *Counter) {
			feed(c, 0, sec, -10, -10)
			feed(c, 10*sec, sec, -10, -10) // 9 s after the last: over 3 s
		}, 20, 1},
		{"time running backwards", func(c *Counter) {
			feed(c, 10*sec, sec, -10, -10)
			feed(c, 0, sec, -10, -10)
		}, 20, 1},
		{"NaN ignored", func(c *Counter) {
			feed(c, 0, sec, -10)
			c.Add(sec/2, math.NaN(), nan)
			feed(c, sec, sec, -10)
		}, 10, 0},
	}
	for _, tc := range tests {
		c := NewCounter(0.1, 1, 3*sec)
		tc.run(&c)
		if math.Abs(c.OutAs-tc.want) > 1e-9 || c.Gaps != tc.gaps {
			t.Errorf("%s: out %.3f A·s, gaps %d; want %.3f, %d", tc.name, c.OutAs, c.Gaps, tc.want, tc.gaps)
		}
	}
}

func TestCounterEnergy(t *testing.T) {
	// 10 A at 40 V for 1 h is 400 Wh (P = V·I); unknown voltage counts no energy.
	c := NewCounter(0.1, 1, 0)
	c.Add(0, 10, 40)
	c.Add(3600*sec, 10, 40)
	c.Add(7200*sec, 10, nan)
	if wh := c.InWs / 3600; math.Abs(wh-400) > 1e-9 {
		t.Errorf("energy in %.6f Wh, want 400", wh)
	}
	if ah := c.InAs / 3600; math.Abs(ah-20) > 1e-9 {
		t.Errorf("charge in %.6f Ah, want 20 (charge counts without a voltage)", ah)
	}
}

func repeat(v float64, n int) []float64 {
	out := make([]float64, n)
	for i := range out {
		out[i] = v
	}
	return out
}
