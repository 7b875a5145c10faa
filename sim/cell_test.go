package sim

import (
	"math"
	"testing"
)

func constOCV(t *testing.T, v float64) *OCVTable {
	t.Helper()
	tab, err := NewOCVTable("constant", []float64{0, 1}, []float64{v, v})
	if err != nil {
		t.Fatal(err)
	}
	return tab
}

// The one-RC Thevenin model's step response against its analytic solution
// V(t) = OCV − I·R0 − I·R1·(1 − e^(−t/(R1·C1))) (I discharging), and the
// check value of REFERENCES.md: OCV 3.7 V, R0 30 mΩ, R1 15 mΩ, C1 2000 F,
// 3 A discharge from rest: 3.597244 V at 10 s, the same whatever Δt, since
// the discretisation is exact for a constant current (Plett, Battery
// Management Systems Vol. I, ch. 2, from memory).
func TestTheveninStepResponse(t *testing.T) {
	const ocv, r0, r1, c1, i = 3.7, 0.030, 0.015, 2000.0, -3.0
	analytic := func(tt float64) float64 {
		return ocv + i*r0 + i*r1*(1-math.Exp(-tt/(r1*c1)))
	}
	for _, dt := range []float64{10, 1, 0.1, 0.01, 2.5} {
		c := Cell{CapacityAh: 1e9, R0: r0, R1: r1, C1: c1, OCV: constOCV(t, ocv)}
		steps := int(math.Round(10 / dt))
		for k := 0; k < steps; k++ {
			c.Step(i, dt)
		}
		got := c.Voltage(i)
		if math.Abs(got-3.597244) > 5e-7 {
			t.Errorf("dt=%g: v(10 s) = %.7f V, want 3.597244 V (REFERENCES.md)", dt, got)
		}
		if math.Abs(got-analytic(10)) > 1e-12 {
			t.Errorf("dt=%g: v(10 s) = %.12f V, analytic %.12f V", dt, got, analytic(10))
		}
	}
	// along the way, at every step, not just at the end
	c := Cell{CapacityAh: 1e9, R0: r0, R1: r1, C1: c1, OCV: constOCV(t, ocv)}
	for k := 1; k <= 200; k++ {
		c.Step(i, 0.5)
		if got, want := c.Voltage(i), analytic(0.5*float64(k)); math.Abs(got-want) > 1e-12 {
			t.Fatalf("t=%g s: %.12f V, analytic %.12f V", 0.5*float64(k), got, want)
		}
	}
}

// Coulomb counting as in REFERENCES.md (Plett Vol. I ch. 2, from memory):
// Q = 50 Ah, z0 = 0.80, −25 A for 1800 s → 0.550000; then +10 A for 3600 s
// with η = 0.99 → 0.748000.
func TestCellCoulombCounting(t *testing.T) {
	c := Cell{CapacityAh: 50, R0: 0.001, R1: 0.0005, C1: 60000, Eta: 0.99, OCV: constOCV(t, 3.7)}
	c.SetSOC(0.80)
	for k := 0; k < 1800; k++ {
		c.Step(-25, 1)
	}
	if math.Abs(c.SOC()-0.55) > 1e-9 {
		t.Errorf("after discharge z = %.9f, want 0.550000", c.SOC())
	}
	for k := 0; k < 36; k++ {
		c.Step(10, 100)
	}
	if math.Abs(c.SOC()-0.748) > 1e-9 {
		t.Errorf("after charge z = %.9f, want 0.748000", c.SOC())
	}
}

func TestCellCurrentLimits(t *testing.T) {
	c := Cell{CapacityAh: 2, Eta: 1, OCV: constOCV(t, 3.7)}
	c.SetSOC(0.25)
	lo, hi := c.CurrentLimits(10)
	// 0.25 × 7200 A·s over 10 s = 180 A out; 0.75 × 7200 / 10 = 540 A in.
	if math.Abs(lo+180) > 1e-9 || math.Abs(hi-540) > 1e-9 {
		t.Errorf("limits %g, %g; want -180, 540", lo, hi)
	}
}

// The built-in rest-voltage tables: O(1) lookup equals direct interpolation,
// never falls with SOC, inverts, and matches the trade's rules of thumb
// (NMC full near 4.2 V, near 3.6–3.7 V at mid charge; common practice, no
// source).
func TestOCVTables(t *testing.T) {
	for _, chem := range []string{"nmc", "lfp"} {
		tab, err := ChemistryOCV(chem)
		if err != nil {
			t.Fatal(err)
		}
		prev := 0.0
		for k := 0; k <= 10000; k++ {
			z := float64(k) / 10000
			v := tab.At(z)
			if d := math.Abs(v - tab.interp(z)); d > 1e-12 {
				t.Fatalf("%s z=%g: grid %g, direct %g", chem, z, v, tab.interp(z))
			}
			if v < prev {
				t.Fatalf("%s: OCV falls at z=%g", chem, z)
			}
			prev = v
			if z > 0.01 && z < 0.99 {
				if back := tab.SOC(v); math.Abs(back-z) > 1e-9 && tab.At(back) != v {
					t.Fatalf("%s: SOC(OCV(%g)) = %g", chem, z, back)
				}
			}
		}
	}
	nmc, _ := ChemistryOCV("nmc")
	if v := nmc.At(1); v < 4.1 || v > 4.25 {
		t.Errorf("nmc full at %g V, want near 4.2 V", v)
	}
	if v := nmc.At(0.5); v < 3.55 || v > 3.75 {
		t.Errorf("nmc at half charge %g V, want near 3.6–3.7 V", v)
	}
	if _, err := ChemistryOCV("lead-acid"); err == nil {
		t.Error("unknown chemistry accepted")
	}
	for _, bad := range []struct{ z, v []float64 }{
		{[]float64{0, 0.5}, []float64{3, 4}},
		{[]float64{0, 0.6, 0.5, 1}, []float64{3, 3.5, 3.6, 4}},
		{[]float64{0, 1}, []float64{4, 3}},
		{[]float64{0, 1}, []float64{4}},
	} {
		if _, err := NewOCVTable("bad", bad.z, bad.v); err == nil {
			t.Errorf("table %v %v accepted", bad.z, bad.v)
		}
	}
}
