package sim

import "math"

// Cell is one cell as a Thevenin equivalent circuit: an open-circuit voltage
// that depends on the state of charge, a series resistance R0 and one RC pair
// (R1 ∥ C1). Current is positive when charging.
//
// The discrete update is exact for a current held constant over each step:
//
//	a        = exp(−Δt/(R1·C1))
//	iR1[k+1] = a·iR1[k] + (1 − a)·i[k]
//	z[k+1]   = z[k] + η·i[k]·Δt/Q          (η only when charging)
//	v        = OCV(z) + R1·iR1 + R0·i
//
// (the one-RC model and its discretisation as in Plett, Battery Management
// Systems Vol. I, ch. 2, from memory).
type Cell struct {
	// CapacityAh is the cell's own capacity Q in ampere-hours.
	CapacityAh float64
	// R0 is the series resistance in ohms; R1 and C1 the RC pair (Ω, F).
	R0, R1, C1 float64
	// Eta is the charge efficiency (1 = every coulomb charged is stored).
	Eta float64
	// OCV gives the open-circuit voltage from the state of charge.
	OCV *OCVTable

	z   float64 // state of charge, 0..1
	iR1 float64 // current through R1, A

	// cache of exp(−Δt/(R1·C1)) for the last Δt
	lastDt, lastA float64
}

// SOC is the cell's state of charge, 0..1.
func (c *Cell) SOC() float64 { return c.z }

// SetSOC sets the state of charge (clamped to 0..1) and lets the RC pair
// relax, as after a long rest.
func (c *Cell) SetSOC(z float64) {
	if math.IsNaN(z) {
		z = 0
	}
	c.z = clamp(z, 0, 1)
	c.iR1 = 0
}

// IR1 is the current through R1, in amperes.
func (c *Cell) IR1() float64 { return c.iR1 }

// decay returns exp(−dt/(R1·C1)), cached for a repeated dt.
func (c *Cell) decay(dt float64) float64 {
	if dt != c.lastDt {
		c.lastDt = dt
		if c.R1 <= 0 || c.C1 <= 0 {
			c.lastA = 0
		} else {
			c.lastA = math.Exp(-dt / (c.R1 * c.C1))
		}
	}
	return c.lastA
}

// Voltage is the terminal voltage with current i flowing now (A, positive
// charging): OCV(z) + R1·iR1 + R0·i.
func (c *Cell) Voltage(i float64) float64 {
	return c.OCV.At(c.z) + c.R1*c.iR1 + c.R0*i
}

// Step holds current i (A, positive charging) for dt seconds. The caller keeps the state of charge within 0..1 by limiting i (see
// MaxCurrent); Step clamps only what rounding leaves.
func (c *Cell) Step(i, dt float64) {
	a := c.decay(dt)
	c.iR1 = a*c.iR1 + (1-a)*i
	eta := 1.0
	if i > 0 && c.Eta > 0 {
		eta = c.Eta
	}
	c.z += eta * i * dt / (3600 * c.CapacityAh)
	if c.z < 0 {
		c.z = 0
	} else if c.z > 1 {
		c.z = 1
	}
}

// Heat is the power dissipated in the cell's resistances with current i now:
// i²·R0 + iR1²·R1, in watts.
func (c *Cell) Heat(i float64) float64 {
	return i*i*c.R0 + c.iR1*c.iR1*c.R1
}

// CurrentLimits gives the range of current the cell can carry for dt seconds
// without its state of charge leaving 0..1: lo ≤ 0 ≤ hi.
func (c *Cell) CurrentLimits(dt float64) (lo, hi float64) {
	q := 3600 * c.CapacityAh / dt
	eta := 1.0
	if c.Eta > 0 {
		eta = c.Eta
	}
	return -c.z * q, (1 - c.z) * q / eta
}

func clamp(x, lo, hi float64) float64 {
	if x < lo {
		return lo
	}
	if x > hi {
		return hi
	}
	return x
}
