package analyze

// Charge is the counted charge at each current reading: Q[i] is ∫I dt from
// the first reading to Current.T[i] in Ah (positive charging), by the
// trapezoid rule, never across a gap (the interval holding a gap adds
// nothing). Throughput is ∫|I| dt the same way, in Ah.
type Charge struct {
	T          []float64
	Q          []float64
	Throughput []float64
}

// CountCharge integrates the session's current (see Charge).
func CountCharge(s *Session) *Charge {
	tr := &s.Current
	n := tr.Len()
	c := &Charge{T: tr.T, Q: make([]float64, n), Throughput: make([]float64, n)}
	gi := 0
	for i := 1; i < n; i++ {
		t0, t1 := tr.T[i-1], tr.T[i]
		gap := false
		for gi < len(s.Gaps) && s.Gaps[gi] <= t1 {
			if s.Gaps[gi] > t0 {
				gap = true
			}
			gi++
		}
		c.Q[i], c.Throughput[i] = c.Q[i-1], c.Throughput[i-1]
		if gap {
			continue
		}
		dq, dabs := trapezoid(tr.V[i-1], tr.V[i], t1-t0)
		c.Q[i] += dq
		c.Throughput[i] += dabs
	}
	return c
}

// trapezoid integrates a linear current from i0 to i1 over dt seconds and
// returns the charge and the absolute charge in Ah. When the current
// crosses zero the absolute part is split at the crossing.
func trapezoid(i0, i1, dt float64) (q, abs float64) {
	q = (i0 + i1) / 2 * dt / 3600
	if (i0 >= 0) == (i1 >= 0) {
		if q < 0 {
			return q, -q
		}
		return q, q
	}
	// crossing at fraction f = i0/(i0−i1)
	f := i0 / (i0 - i1)
	a := i0 / 2 * f * dt / 3600
	b := i1 / 2 * (1 - f) * dt / 3600
	if a < 0 {
		a = -a
	}
	if b < 0 {
		b = -b
	}
	return q, a + b
}

// At interpolates the counted charge at time t, Ah.
func (c *Charge) At(t float64) float64 {
	tr := Trace{T: c.T, V: c.Q}
	v, _ := tr.At(t)
	return v
}

// ThroughputAt interpolates ∫|I| dt at time t, Ah.
func (c *Charge) ThroughputAt(t float64) float64 {
	tr := Trace{T: c.T, V: c.Throughput}
	v, _ := tr.At(t)
	return v
}
