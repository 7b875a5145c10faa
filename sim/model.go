package sim

import "math"

// Model is the simulated pack: cells in series carrying one current, and
// temperature sensors as thermal nodes. It knows no time of day, frames or
// scenario; Step moves it forward. Not safe for concurrent use.
//
// The cells' terminal voltages at the latest step's current are computed
// once and cached; code that changes a cell between steps (SetSOC, its
// resistances) calls Invalidate before asking for voltages again.
type Model struct {
	Cells   []Cell
	Sensors []SensorNode
	// AmbientC is the ambient temperature in °C.
	AmbientC float64
	// Contactor is the true state of the main contactor (closed = true).
	Contactor bool

	// I is the current of the latest step, A, positive charging.
	I float64
	// T is simulated time since the model started, s.
	T float64
	// ChargeAs is the charge that flowed through the pack, ∫I dt in A·s
	// (positive charging), over the model's life.
	ChargeAs float64

	// terminal voltages at current I after the latest Step, with their sum,
	// lowest and highest, computed on first use after each Step
	v              []float64
	vSum, vLo, vHi float64
	vOK            bool
}

// cache computes every cell's terminal voltage at m.I in one pass.
func (m *Model) cache() {
	if len(m.v) != len(m.Cells) {
		m.v = make([]float64, len(m.Cells))
	}
	m.vSum, m.vLo, m.vHi = 0, math.Inf(1), math.Inf(-1)
	for k := range m.Cells {
		x := m.Cells[k].Voltage(m.I)
		m.v[k] = x
		m.vSum += x
		if x < m.vLo {
			m.vLo = x
		}
		if x > m.vHi {
			m.vHi = x
		}
	}
	m.vOK = true
}

// CellVoltage is cell k's terminal voltage (k from 0) with the current of
// the latest step flowing.
func (m *Model) CellVoltage(k int) float64 {
	if !m.vOK {
		m.cache()
	}
	return m.v[k]
}

// Invalidate drops the cached voltages after a change made outside Step
// (SetSOC on a cell, say).
func (m *Model) Invalidate() { m.vOK = false }

// SensorNode is one temperature sensor: a lumped thermal node heated by the
// cells it sits on and by any conductor it touches.
type SensorNode struct {
	Thermal
	// Cells are the indexes of the cells whose heat reaches this node; the
	// node's heat is their mean dissipation times len(Cells).
	Cells []int
	// ExtraOhm is the resistance of a busbar or link the sensor sits on,
	// heated by I²·ExtraOhm.
	ExtraOhm float64
	// HeatW is a fixed extra heat input in W (a nearby hot part; faults).
	HeatW float64
}

// PackVoltage is the sum of the cell terminal voltages with current i now.
func (m *Model) PackVoltage(i float64) float64 {
	if i == m.I {
		if !m.vOK {
			m.cache()
		}
		return m.vSum
	}
	var v float64
	for k := range m.Cells {
		v += m.Cells[k].Voltage(i)
	}
	return v
}

// CellVoltageRange gives the lowest and highest cell terminal voltage with
// current i now.
func (m *Model) CellVoltageRange(i float64) (lo, hi float64) {
	if i == m.I {
		if !m.vOK {
			m.cache()
		}
		return m.vLo, m.vHi
	}
	lo, hi = math.Inf(1), math.Inf(-1)
	for k := range m.Cells {
		v := m.Cells[k].Voltage(i)
		if v < lo {
			lo = v
		}
		if v > hi {
			hi = v
		}
	}
	return lo, hi
}

// CurrentLimits is the range of current every cell can take for dt seconds
// without any state of charge leaving 0..1.
func (m *Model) CurrentLimits(dt float64) (lo, hi float64) {
	lo, hi = math.Inf(-1), math.Inf(1)
	for k := range m.Cells {
		l, h := m.Cells[k].CurrentLimits(dt)
		if l > lo {
			lo = l
		}
		if h < hi {
			hi = h
		}
	}
	return lo, hi
}

// CVCurrent is the charging current that brings the pack's terminal voltage
// to vTarget at the end of a step of dt seconds, from the exact one-RC update
// and the OCV's local slope. It may be negative
// when the pack already stands above vTarget; the charger clamps it.
func (m *Model) CVCurrent(vTarget, dt float64) float64 {
	var num, den float64
	for k := range m.Cells {
		c := &m.Cells[k]
		a := c.decay(dt)
		num += c.OCV.At(c.z) + c.R1*a*c.iR1
		eta := 1.0
		if c.Eta > 0 {
			eta = c.Eta
		}
		den += c.R0 + c.R1*(1-a) + c.OCV.Slope(c.z)*eta*dt/(3600*c.CapacityAh)
	}
	if den <= 0 {
		return 0
	}
	return (vTarget - num) / den
}

// Step holds current i (A, positive charging) for dt seconds. The current is
// first limited so that no cell's state of charge leaves 0..1, and is zero
// while the contactor is open. It returns the current actually applied.
func (m *Model) Step(i, dt float64) float64 {
	if !m.Contactor {
		i = 0
	}
	lo, hi := m.CurrentLimits(dt)
	i = clamp(i, lo, hi)
	for k := range m.Sensors {
		s := &m.Sensors[k]
		var p float64
		for _, c := range s.Cells {
			p += m.Cells[c].Heat(i)
		}
		p += i*i*s.ExtraOhm + s.HeatW
		s.Step(p, m.AmbientC, dt)
	}
	for k := range m.Cells {
		m.Cells[k].Step(i, dt)
	}
	m.I = i
	m.T += dt
	m.ChargeAs += i * dt
	m.vOK = false // computed in one pass when first asked for
	return i
}

// MeanSOC is the mean state of charge of the cells, 0..1.
func (m *Model) MeanSOC() float64 {
	if len(m.Cells) == 0 {
		return 0
	}
	var s float64
	for k := range m.Cells {
		s += m.Cells[k].z
	}
	return s / float64(len(m.Cells))
}

// StoredAh is the charge held by the cells, Σ z·Q, in ampere-hours.
func (m *Model) StoredAh() float64 {
	var s float64
	for k := range m.Cells {
		s += m.Cells[k].z * m.Cells[k].CapacityAh
	}
	return s
}
