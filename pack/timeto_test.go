package pack

import (
	"math"
	"testing"
)

func TestTimeToEmpty(t *testing.T) {
	// Coulomb counting (Plett 2015 ch. 2 [memory]): 180 Ah at 50 % is 90 Ah;
	// at −18 A that lasts 5 h.
	if got := TimeToEmpty(0.5, 180, -18); math.Abs(got-5*3600) > 1e-6 {
		t.Errorf("90 Ah at 18 A: %g s, want 18000", got)
	}
	for _, a := range []float64{0, 5, math.NaN()} {
		if !math.IsNaN(TimeToEmpty(0.5, 180, a)) {
			t.Errorf("not discharging (%g A) must give NaN", a)
		}
	}
}

// The taper model is ours (rough; common practice, no source): CC to the
// CV point, then an exponential decay to C/20 that delivers the charge
// still missing. The numbers below are worked by hand from that model.
func TestTimeToFull(t *testing.T) {
	// 100 Ah at 50 A (0.5 C) from 50 %: the CV point is 1 − 0.25·0.5 = 0.875;
	// CC 37.5 Ah / 50 A = 2700 s; CV: 12.5 Ah = 45000 A·s, τ = 45000/(50 − 5)
	// = 1000 s, time τ·ln(50/5) = 2302.585 s. Total 5002.585 s.
	got := TimeToFull(0.5, 100, 50, false)
	if math.Abs(got-(2700+1000*math.Log(10))) > 1e-6 {
		t.Errorf("0.5 C from 50 %%: %.3f s, want 5002.585", got)
	}
	// Already in CV at 95 % and 20 A: 5 Ah = 18000 A·s, τ = 18000/15 = 1200 s,
	// time 1200·ln(4) = 1663.553 s.
	got = TimeToFull(0.95, 100, 20, true)
	if math.Abs(got-1200*math.Log(4)) > 1e-6 {
		t.Errorf("CV at 95 %%: %.3f s, want 1663.553", got)
	}
	// The taper must make a charge longer than constant current all the way.
	if cc := 0.5 * 100 * 3600 / 50; !(TimeToFull(0.5, 100, 50, false) > cc) {
		t.Error("time to full must exceed the pure constant-current time")
	}
	if !math.IsNaN(TimeToFull(0.5, 100, -5, false)) {
		t.Error("discharging must give NaN")
	}
}
