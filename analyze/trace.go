package analyze

import (
	"math"
	"sort"
)

// Trace is one quantity's readings in time order: T in seconds of data time
// from the session's start, V in the quantity's unit (V, A, °C, %, 0/1 for
// flags). Invalid and implausible readings are not in a trace.
type Trace struct {
	T []float64
	V []float64
}

// Len is the number of readings.
func (tr *Trace) Len() int { return len(tr.T) }

// Empty reports whether the trace has no readings.
func (tr *Trace) Empty() bool { return len(tr.T) == 0 }

// Add appends a reading. Readings should come in time order; Sort restores
// the order when a trace was fed from several sources.
func (tr *Trace) Add(t, v float64) {
	tr.T = append(tr.T, t)
	tr.V = append(tr.V, v)
}

// sorted reports whether T is non-decreasing.
func (tr *Trace) sorted() bool {
	for i := 1; i < len(tr.T); i++ {
		if tr.T[i] < tr.T[i-1] {
			return false
		}
	}
	return true
}

// Sort puts the readings in time order (stable, so equal times keep their
// order of arrival).
func (tr *Trace) Sort() {
	if tr.sorted() {
		return
	}
	idx := make([]int, len(tr.T))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return tr.T[idx[a]] < tr.T[idx[b]] })
	t := make([]float64, len(idx))
	v := make([]float64, len(idx))
	for i, k := range idx {
		t[i], v[i] = tr.T[k], tr.V[k]
	}
	tr.T, tr.V = t, v
}

// search returns the index of the first reading with T > t.
func (tr *Trace) search(t float64) int {
	return sort.SearchFloat64s(tr.T, math.Nextafter(t, math.Inf(1)))
}

// At interpolates the trace linearly at time t. Outside the readings it
// holds the first or last value; ok is false for an empty trace.
func (tr *Trace) At(t float64) (v float64, ok bool) {
	n := len(tr.T)
	if n == 0 {
		return 0, false
	}
	i := tr.search(t)
	switch {
	case i == 0:
		return tr.V[0], true
	case i == n:
		return tr.V[n-1], true
	}
	return lerp(tr.T[i-1], tr.V[i-1], tr.T[i], tr.V[i], t), true
}

// Before returns the index of the last reading at or before t, or -1.
func (tr *Trace) Before(t float64) int { return tr.search(t) - 1 }

// Window returns the index range [i, j) of the readings with a ≤ T < b.
func (tr *Trace) Window(a, b float64) (i, j int) {
	i = sort.SearchFloat64s(tr.T, a)
	j = sort.SearchFloat64s(tr.T, b)
	return i, j
}

// lerp interpolates between (t0, v0) and (t1, v1) at t.
func lerp(t0, v0, t1, v1, t float64) float64 {
	if t1 == t0 {
		return v1
	}
	return v0 + (v1-v0)*(t-t0)/(t1-t0)
}

// cursor interpolates a trace at times that only increase, in amortised
// constant time per call.
type cursor struct {
	tr *Trace
	i  int // index of the first reading with T > the last query
}

func (c *cursor) at(t float64) (float64, bool) {
	tr := c.tr
	n := len(tr.T)
	if n == 0 {
		return 0, false
	}
	if c.i > 0 && tr.T[c.i-1] > t { // went back: start again
		c.i = 0
	}
	for c.i < n && tr.T[c.i] <= t {
		c.i++
	}
	switch {
	case c.i == 0:
		return tr.V[0], true
	case c.i == n:
		return tr.V[n-1], true
	}
	return lerp(tr.T[c.i-1], tr.V[c.i-1], tr.T[c.i], tr.V[c.i], t), true
}
