package pack

import "math"

var nan = math.NaN()

// Counting defaults, used when the profile's [soc] leaves them out.
const (
	// DefaultDeadbandA: currents smaller than this count as zero, so the
	// offset of an idle current sensor does not drift the count (common
	// practice, no source).
	DefaultDeadbandA = 0.1
	// DefaultChargeEfficiency: the share of charge current that ends up
	// stored (coulombic efficiency of lithium-ion cells is near 99.5 %;
	// common practice, no source).
	DefaultChargeEfficiency = 0.995
	// DefaultMaxGapNs is the longest interval between two current readings
	// the counter integrates across when the current's period is unknown.
	DefaultMaxGapNs = 5_000_000_000
)

// Counter counts charge and energy from current readings by the trapezoid
// rule on data time. Positive current is charging.
//
// Each reading first goes through the dead-band; between two readings the
// current is taken to change linearly, and a segment that crosses zero is
// split at the crossing so that charge in and charge out are each exact for
// the straight line. Nothing is integrated across a gap: a Break, an
// interval longer than MaxGapNs, or time running backwards.
//
// The zero value is not ready: use NewCounter.
type Counter struct {
	DeadbandA  float64 // readings with |i| below this count as 0 A
	Efficiency float64 // charge efficiency η applied to charge in (0 < η ≤ 1)
	MaxGapNs   int64   // longest interval integrated; 0 = no limit

	has   bool
	lastT int64
	lastI float64
	lastP float64 // W, NaN when the voltage was unknown

	InAs, OutAs float64 // charge in and out, A·s, both ≥ 0, no efficiency
	InWs, OutWs float64 // energy in and out, W·s (J), both ≥ 0
	// NetAs is the change of stored charge: η·in − out, A·s.
	NetAs float64
	// Gaps counts the breaks seen (Break calls and over-long intervals).
	Gaps int
}

// NewCounter returns a counter with the given dead-band (A), charge
// efficiency and longest integrated interval (ns). Out-of-range values take
// the defaults: a negative dead-band, an efficiency outside (0, 1].
func NewCounter(deadbandA, efficiency float64, maxGapNs int64) Counter {
	if !(deadbandA >= 0) {
		deadbandA = DefaultDeadbandA
	}
	if !(efficiency > 0 && efficiency <= 1) {
		efficiency = DefaultChargeEfficiency
	}
	return Counter{DeadbandA: deadbandA, Efficiency: efficiency, MaxGapNs: maxGapNs}
}

// Break stops integration: the next reading starts a new segment.
func (c *Counter) Break() {
	if c.has {
		c.Gaps++
	}
	c.has = false
}

// Reset clears the counts and the segment, keeping the settings.
func (c *Counter) Reset() {
	*c = Counter{DeadbandA: c.DeadbandA, Efficiency: c.Efficiency, MaxGapNs: c.MaxGapNs}
}

// Add takes a current reading i (A) at data time t (ns) with the pack voltage
// v (V; NaN when unknown, then no energy is counted for the segment). It
// reports whether the reading was integrated with the previous one. Two
// readings at the same time are a step: the later replaces the earlier
// without adding area. Non-finite currents are ignored.
func (c *Counter) Add(t int64, i, v float64) bool {
	if math.IsNaN(i) || math.IsInf(i, 0) {
		return false
	}
	if math.Abs(i) < c.DeadbandA {
		i = 0
	}
	p := i * v // NaN when v is unknown
	if math.IsInf(p, 0) {
		p = nan
	}
	ok := false
	switch {
	case !c.has:
	case t == c.lastT:
	case t < c.lastT || (c.MaxGapNs > 0 && t-c.lastT > c.MaxGapNs):
		c.Gaps++
	default:
		dt := float64(t-c.lastT) / 1e9
		in, out := trapezoidSplit(c.lastI, i, dt)
		c.InAs += in
		c.OutAs += out
		c.NetAs += c.Efficiency*in - out
		if !math.IsNaN(c.lastP) && !math.IsNaN(p) {
			win, wout := trapezoidSplit(c.lastP, p, dt)
			c.InWs += win
			c.OutWs += wout
		}
		ok = true
	}
	c.has, c.lastT, c.lastI, c.lastP = true, t, i, p
	return ok
}

// Last returns the latest reading after the dead-band and whether there is one.
func (c *Counter) Last() (t int64, i float64, ok bool) { return c.lastT, c.lastI, c.has }

// trapezoidSplit integrates a quantity changing linearly from a to b over dt
// and returns the positive and the negative area, both as non-negative
// numbers. A segment that changes sign is split where the line crosses zero.
func trapezoidSplit(a, b, dt float64) (pos, neg float64) {
	switch {
	case a >= 0 && b >= 0:
		return (a + b) / 2 * dt, 0
	case a <= 0 && b <= 0:
		return 0, -(a + b) / 2 * dt
	}
	f := a / (a - b) // share of dt before the crossing
	if a > 0 {
		return a * f * dt / 2, -b * (1 - f) * dt / 2
	}
	return b * (1 - f) * dt / 2, -a * f * dt / 2
}

// SOCAfter is coulomb counting: the state of charge (fraction 0–1) after a
// net stored charge change netAs (A·s, positive = charged, efficiency already
// applied) from z0, for a capacity of capAh ampere-hours.
func SOCAfter(z0, netAs, capAh float64) float64 {
	return z0 + netAs/(capAh*3600)
}
