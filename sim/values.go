package sim

import (
	"math"
	"strings"

	"packwatch/config"
	"packwatch/decode"
)

// reporter turns the model's state into a reading for every slot of the
// compiled profile, with faults and forced values applied: what a BMS and a
// console would report about the simulated pack.
type reporter struct {
	slots []decode.Slot
	prof  *config.Profile
	// code maps each enum slot's phase and fault names to raw codes.
	stateCodes map[int][4]int64 // slot → codes for idle, charging, discharging, fault
	readings   []Reading
	stamp      []uint64 // epoch each reading was computed in
	epoch      uint64
	// the state of the current epoch
	m        *Model
	ph       Phase
	fs       *faultState
	forced   map[int]float64
	chgV     float64
	cv       bool
	packVVal float64
	packVOK  bool
	minVVal  float64
	minVOK   bool
	// frozen holds values kept by stopped sensors and a stuck contactor.
	frozen map[int]float64
}

func newReporter(m *decode.Map) *reporter {
	r := &reporter{slots: m.Slots(), prof: m.Profile(), stateCodes: map[int][4]int64{}, frozen: map[int]float64{}}
	r.readings = make([]Reading, len(r.slots))
	r.stamp = make([]uint64, len(r.slots))
	for i, s := range r.slots {
		if s.Bind.Kind != config.BindBMSState {
			continue
		}
		codes := [4]int64{0, 1, 2, 3}
		for code, name := range s.Enum {
			n := strings.ToLower(name)
			switch {
			case strings.Contains(n, "fault"), strings.Contains(n, "error"):
				codes[3] = code
			case strings.HasPrefix(n, "discharg"):
				codes[2] = code
			case strings.HasPrefix(n, "charg"):
				codes[1] = code
			case n == "idle", n == "rest", n == "standby", n == "ready":
				codes[0] = code
			}
		}
		r.stateCodes[i] = codes
	}
	return r
}

// faultState is what the active faults do to the readings right now.
type faultState struct {
	cellOffset map[int]float64 // cell index from 1 → volts added
	sensorStop map[int]bool    // sensor index from 1
	stuck      bool
	flag       bool
}

// begin starts a new epoch: every slot is computed afresh from the model
// the next time it is read. forced maps a cell (from 1) to a reported
// voltage that overrides the model's. The arguments are kept until the next
// begin.
func (r *reporter) begin(m *Model, ph Phase, cv bool, fs *faultState, forced map[int]float64, chgV float64) {
	r.epoch++
	r.m, r.ph, r.cv, r.fs, r.forced, r.chgV = m, ph, cv, fs, forced, chgV
	r.packVOK, r.minVOK = false, false
}

// minV is the lowest cell's terminal voltage now.
func (r *reporter) minV() float64 {
	if !r.minVOK {
		r.minVVal, _ = r.m.CellVoltageRange(r.m.I)
		r.minVOK = true
	}
	return r.minVVal
}

// reading gives a slot's reading in the current epoch (readingSource).
func (r *reporter) reading(i int) Reading {
	if r.stamp[i] != r.epoch {
		s := &r.slots[i]
		v, inv := r.value(s, i)
		r.readings[i] = Reading{Value: v, Invalid: inv, Raw: s.Bind.Kind == config.BindBMSState}
		r.stamp[i] = r.epoch
	}
	return r.readings[i]
}

func (r *reporter) packV() float64 {
	if !r.packVOK {
		r.packVVal, r.packVOK = r.m.PackVoltage(r.m.I), true
	}
	return r.packVVal
}

// balanceAboveV is how far above the lowest cell a cell is bled.
const balanceAboveV = 0.010

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

func (r *reporter) value(s *decode.Slot, slot int) (float64, bool) {
	m, ph, fs, forced, chgV := r.m, r.ph, r.fs, r.forced, r.chgV
	b := s.Bind
	n := b.Index
	switch b.Kind {
	case config.BindCellVoltage:
		if n < 1 || n > len(m.Cells) {
			return 0, true
		}
		if len(forced) > 0 {
			if v, ok := forced[n]; ok {
				return v, false
			}
		}
		v := m.CellVoltage(n - 1)
		if len(fs.cellOffset) > 0 {
			v += fs.cellOffset[n]
		}
		return v, false
	case config.BindCellBalancing:
		// the BMS bleeds cells more than 10 mV above the lowest during the
		// constant-voltage phase (common practice, no source)
		if n < 1 || n > len(m.Cells) || ph != PhaseCharging || !r.cv {
			return 0, false
		}
		return b2f(m.CellVoltage(n-1) > r.minV()+balanceAboveV), false
	case config.BindTemp:
		if n < 1 || n > len(m.Sensors) {
			return 0, true
		}
		if len(fs.sensorStop) > 0 && fs.sensorStop[n] {
			if _, ok := r.frozen[slot]; !ok {
				r.frozen[slot] = m.Sensors[n-1].T
			}
			return r.frozen[slot], true
		}
		return m.Sensors[n-1].T, false
	case config.BindPackCurrent:
		return m.I, false
	case config.BindStringCurrent:
		return m.I, false
	case config.BindPackVoltage:
		return r.packV(), false
	case config.BindLinkVoltage:
		if m.Contactor {
			return r.packV(), false
		}
		return 0, false
	case config.BindPackSOC:
		return 100 * m.MeanSOC(), false
	case config.BindPackSOH:
		var q float64
		for k := range m.Cells {
			q += m.Cells[k].CapacityAh
		}
		return math.Min(100, 100*q/float64(len(m.Cells))/r.prof.Pack.CapacityAh), false
	case config.BindPackSerial:
		return 1, false
	case config.BindIsolation:
		return 5000, false
	case config.BindContactor:
		closed := b2f(m.Contactor)
		if fs.stuck {
			if _, ok := r.frozen[slot]; !ok {
				r.frozen[slot] = closed
			}
			return r.frozen[slot], false
		}
		return closed, false
	case config.BindChargeEnable:
		return b2f(ph == PhaseCharging), false
	case config.BindInterlock:
		return 1, false
	case config.BindBMSState:
		codes := r.stateCodes[slot]
		code := codes[ph]
		if fs.flag {
			code = codes[3]
		}
		return float64(code), false // a raw code (Reading.Raw)
	case config.BindBMS:
		switch b.Name {
		case "charge_limit_a":
			if l := r.prof.Limits.ChargeCurrent; l != nil {
				return *l, false
			}
			return 0.5 * r.prof.Pack.CapacityAh, false
		case "discharge_limit_a":
			if l := r.prof.Limits.DischargeCurrent; l != nil {
				return *l, false
			}
			return 2 * r.prof.Pack.CapacityAh, false
		case "charge_voltage_v":
			return chgV, false
		case "supply_voltage":
			return 12.0, false
		}
	case config.BindCharger:
		if ph != PhaseCharging {
			return 0, false
		}
		if b.Name == "voltage" {
			return r.packV(), false
		}
		return m.I, false
	case config.BindFault:
		return b2f(fs.flag), false
	}
	return 0, false
}
