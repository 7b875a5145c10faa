package sim

import "math"

// Thermal is a lumped thermal node: one temperature for a body of heat
// capacity m·cp, heated by a power P and cooled by convection to ambient:
//
//	m·cp·dT/dt = P − hA·(T − Tamb)
//
// (the lumped energy balance after Bernardi, Pawlikowski and Newman,
// J. Electrochem. Soc. 132 (1985), reduced to Joule heat). The steady rise is
// P/(hA) and the time constant m·cp/(hA). Step solves the equation exactly
// for P and Tamb held over the step.
type Thermal struct {
	// HeatCap is m·cp in J/K.
	HeatCap float64
	// HA is the convective conductance h·A to ambient in W/K.
	HA float64
	// T is the temperature in °C.
	T float64

	lastDt, lastA float64
}

// Step holds heating power p (W) and ambient temperature amb (°C) for dt
// seconds.
func (t *Thermal) Step(p, amb, dt float64) {
	if t.HA <= 0 || t.HeatCap <= 0 {
		if t.HeatCap > 0 {
			t.T += p * dt / t.HeatCap
		}
		return
	}
	if dt != t.lastDt {
		t.lastDt = dt
		t.lastA = math.Exp(-dt * t.HA / t.HeatCap)
	}
	ss := amb + p/t.HA
	t.T = ss + (t.T-ss)*t.lastA
}

// SteadyRise is the temperature rise over ambient that power p holds in the
// steady state, p/(hA), in kelvin.
func (t *Thermal) SteadyRise(p float64) float64 { return p / t.HA }

// TimeConstant is m·cp/(hA) in seconds.
func (t *Thermal) TimeConstant() float64 { return t.HeatCap / t.HA }
