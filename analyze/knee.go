package analyze

import (
	"math"
	"sort"
)

// DefaultKneeK is the default factor k of the knee rule.
const DefaultKneeK = 3

// Knee is where a discharge curve bends down.
type Knee struct {
	Found bool    `json:"found"`
	Q     float64 `json:"ah"` // charge moved since full at the knee, Ah
	V     float64 `json:"v"`  // voltage at the knee
	// MedianSlope is the median of −dV/dQ over the middle of the curve,
	// V/Ah; the knee is the first point past the start of the middle where
	// −dV/dQ exceeds K times it.
	MedianSlope float64 `json:"median_slope_v_per_ah"`
	K           float64 `json:"k"`
}

// FindKnee finds the knee of a discharge curve sampled at a uniform charge
// step (q ascending from full, v falling): the first point where −dV/dQ,
// taken as a centred difference over width w Ah (smoothing), exceeds k
// times its median over the middle half of the curve (25 % to 75 % of its
// charge). The search starts at 25 %: the steep stretch just after full
// (the step of the load and the top of the rest-voltage curve) is not the
// knee. w ≤ 0 means 2 % of the curve's charge; k ≤ 0 means DefaultKneeK.
func FindKnee(q, v []float64, k, w float64) Knee {
	if k <= 0 {
		k = DefaultKneeK
	}
	out := Knee{K: k}
	n := len(q)
	if n < 8 {
		return out
	}
	step := (q[n-1] - q[0]) / float64(n-1)
	if step <= 0 {
		return out
	}
	if w <= 0 {
		w = 0.02 * (q[n-1] - q[0])
	}
	h := int(math.Round(w / 2 / step))
	if h < 1 {
		h = 1
	}
	slope := make([]float64, n)
	for i := range slope {
		a, b := max(i-h, 0), min(i+h, n-1)
		slope[i] = -(v[b] - v[a]) / (q[b] - q[a])
	}
	lo, hi := n/4, 3*n/4
	mid := append([]float64(nil), slope[lo:hi+1]...)
	sort.Float64s(mid)
	med := mid[len(mid)/2]
	out.MedianSlope = med
	if med <= 0 {
		return out
	}
	for i := lo; i < n; i++ {
		if slope[i] > k*med {
			out.Found, out.Q, out.V = true, q[i], v[i]
			return out
		}
	}
	return out
}
