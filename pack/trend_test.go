package pack

import (
	"math"
	"testing"
)

// Ordinary least squares, b = Σ(x−x̄)(y−ȳ)/Σ(x−x̄)², any statistics text
// (common practice, no source). Worked by hand: (0,1) (1,3) (2,2) (3,5):
// x̄ 1.5, ȳ 2.75, Σ(x−x̄)(y−ȳ) 5.5, Σ(x−x̄)² 5 → 1.1.
func TestLeastSquaresSlope(t *testing.T) {
	tests := []struct {
		x, y []float64
		want float64
	}{
		{[]float64{0, 1, 2, 3}, []float64{1, 3, 2, 5}, 1.1},
		{[]float64{0, 10, 20}, []float64{2, 7, 12}, 0.5},
		{[]float64{5, 5, 5}, []float64{1, 2, 3}, 0},
	}
	for _, tc := range tests {
		if got := LeastSquaresSlope(tc.x, tc.y); math.Abs(got-tc.want) > 1e-12 {
			t.Errorf("slope of %v %v = %g, want %g", tc.x, tc.y, got, tc.want)
		}
	}
}

func TestTrendWindow(t *testing.T) {
	var tr Trend
	// 0.02 °C/s for 200 s, then only the last 60 s count; the early part
	// climbs at 1 °C/s and must not pull the fit.
	for s := int64(0); s <= 200; s++ {
		v := 0.02 * float64(s)
		if s < 100 {
			v = float64(s)
		}
		tr.Push(s*sec, v)
	}
	got, ok := tr.Slope(200 * sec)
	if !ok || math.Abs(got-0.02) > 1e-9 {
		t.Errorf("slope over the last 60 s = %g (ok %v), want 0.02", got, ok)
	}
	var short Trend
	short.Push(0, 1)
	short.Push(sec, 2)
	short.Push(2*sec, 3)
	if _, ok := short.Slope(2 * sec); ok {
		t.Error("3 samples over 2 s must not give a trend (need 5 s)")
	}
	short.Push(3*sec, math.NaN())
	if short.n != 3 {
		t.Error("NaN sample must be skipped")
	}
}
