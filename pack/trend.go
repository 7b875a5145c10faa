package pack

// TrendWindowNs is the span of data time a trend looks back over.
const TrendWindowNs = 60_000_000_000

// trendCap holds one sample per second of the window, plus the edges.
const trendCap = 64

// Trend keeps the recent samples of one quantity (one per trend tick) in a
// fixed ring and fits a straight line to the last TrendWindowNs of them.
type Trend struct {
	t [trendCap]int64
	v [trendCap]float64
	n int // samples held
	i int // next write position
}

// Push adds a sample; NaN samples are skipped (no reading at that time).
func (tr *Trend) Push(t int64, v float64) {
	if v != v {
		return
	}
	tr.t[tr.i], tr.v[tr.i] = t, v
	tr.i = (tr.i + 1) % trendCap
	if tr.n < trendCap {
		tr.n++
	}
}

// Reset drops every sample.
func (tr *Trend) Reset() { tr.n, tr.i = 0, 0 }

// Slope is the least-squares slope, per second, of the samples within
// TrendWindowNs before now. ok is false with fewer than 3 samples or when
// they span less than 5 s.
func (tr *Trend) Slope(now int64) (perS float64, ok bool) {
	from := now - TrendWindowNs
	var ts, vs []float64
	var bt [trendCap]float64
	var bv [trendCap]float64
	ts, vs = bt[:0], bv[:0]
	var first, last int64
	for k := 0; k < tr.n; k++ {
		j := (tr.i - tr.n + k + trendCap) % trendCap
		if tr.t[j] < from || tr.t[j] > now {
			continue
		}
		if len(ts) == 0 {
			first = tr.t[j]
		}
		last = tr.t[j]
		ts = append(ts, float64(tr.t[j]-now)/1e9)
		vs = append(vs, tr.v[j])
	}
	if len(ts) < 3 || last-first < 5_000_000_000 {
		return 0, false
	}
	return LeastSquaresSlope(ts, vs), true
}

// LeastSquaresSlope is the slope b of the ordinary least-squares line
// y = a + b·x through the points: Σ(x−x̄)(y−ȳ) / Σ(x−x̄)². It is 0 when the
// x values do not vary.
func LeastSquaresSlope(x, y []float64) float64 {
	n := float64(len(x))
	if n == 0 {
		return 0
	}
	var mx, my float64
	for i := range x {
		mx += x[i]
		my += y[i]
	}
	mx /= n
	my /= n
	var sxy, sxx float64
	for i := range x {
		dx := x[i] - mx
		sxy += dx * (y[i] - my)
		sxx += dx * dx
	}
	if sxx == 0 {
		return 0
	}
	return sxy / sxx
}
