package pack

import (
	"math"

	"packwatch/config"
)

// LimitID names one kind of limit check.
type LimitID uint8

// The limits packwatch checks. Per-reading limits are checked on every update
// of the slot they watch; aggregate limits once per cell cycle of data time.
const (
	LimCellHigh         LimitID = iota // each cell ≤ cell_high_v
	LimCellLow                         // each cell ≥ cell_low_v
	LimSpread                          // highest − lowest cell ≤ spread_v (aggregate)
	LimDeviation                       // largest |cell − average| ≤ deviation_v (aggregate)
	LimTempHigh                        // each sensor ≤ temp_high_c
	LimTempLow                         // each sensor ≥ temp_low_c
	LimChargeTempLow                   // each sensor ≥ charge_temp_low_c while charging
	LimChargeTempHigh                  // each sensor ≤ charge_temp_high_c while charging
	LimTempRise                        // fastest sensor rise ≤ temp_rise_c_per_min (aggregate)
	LimTempSpread                      // hottest − coldest sensor ≤ temp_spread_c (aggregate)
	LimChargeCurrent                   // pack.current ≤ charge_current_a
	LimDischargeCurrent                // pack.current ≥ −discharge_current_a
	numLimits
)

var limitNames = [numLimits]string{
	"cell_high", "cell_low", "spread", "deviation", "temp_high", "temp_low",
	"charge_temp_low", "charge_temp_high", "temp_rise", "temp_spread",
	"charge_current", "discharge_current",
}

var limitLabels = [numLimits]string{
	"Cell high", "Cell low", "Cell spread", "Cell deviation", "Temperature high",
	"Temperature low", "Charge temperature low", "Charge temperature high",
	"Temperature rise", "Temperature spread", "Charge current", "Discharge current",
}

var limitUnits = [numLimits]string{"V", "V", "V", "V", "°C", "°C", "°C", "°C", "°C/min", "°C", "A", "A"}

// String is the limit's key as used in snapshots ("cell_high").
func (l LimitID) String() string {
	if l < numLimits {
		return limitNames[l]
	}
	return "?"
}

// limitSpec is one limit of a profile, resolved with its defaults.
type limitSpec struct {
	set   bool    // the profile gives this limit
	bound float64 // the limit, in its unit; discharge current is negative
	upper bool    // true: values must stay at or below bound
	rule  TripRule
}

// margin is the signed distance of v to the limit: positive inside.
func (s *limitSpec) margin(v float64) float64 {
	if s.upper {
		return s.bound - v
	}
	return v - s.bound
}

// Warn margin defaults, applied when [warn] leaves a value out. Each is a
// fraction of the span the limit guards, so that a warning comes early
// enough to act on but does not sit on during normal use (our choice):
//
//   - cell_v: 4 % of cell_high_v − cell_low_v (0.05 V for 3.00–4.25 V);
//   - spread_v (spread and deviation): 20 % of that limit (0.05 V for 0.25 V);
//   - temp_c: 10 % of temp_high_c − temp_low_c when both are given
//     (6 °C for −10–50 °C), else 5 °C; it also serves the charge window;
//   - current_a: 10 % of each current limit (40 A for 400 A);
//   - temp_rise_c_per_min and temp_spread_c: 20 % of the limit ([warn] has
//     no key for them).
const (
	defaultWarnCellFrac    = 0.04
	defaultWarnSpreadFrac  = 0.20
	defaultWarnTempFrac    = 0.10
	defaultWarnTempC       = 5.0
	defaultWarnCurrentFrac = 0.10
	defaultWarnOtherFrac   = 0.20
)

// warnMargins are the resolved warn margins of a profile.
type warnMargins struct {
	cellV, spreadV, deviationV, tempC, chargeA, dischargeA, riseC, tempSpreadC float64
}

func resolveWarn(p *config.Profile) warnMargins {
	l, w := &p.Limits, &p.Warn
	var m warnMargins
	m.cellV = defaultWarnCellFrac * math.Abs(l.CellHighV-l.CellLowV)
	if w.CellV != nil {
		m.cellV = *w.CellV
	}
	if l.SpreadV != nil {
		m.spreadV = defaultWarnSpreadFrac * math.Abs(*l.SpreadV)
	}
	if l.DeviationV != nil {
		m.deviationV = defaultWarnSpreadFrac * math.Abs(*l.DeviationV)
	}
	if w.SpreadV != nil {
		m.spreadV, m.deviationV = *w.SpreadV, *w.SpreadV
	}
	m.tempC = defaultWarnTempC
	if l.TempHighC != nil && l.TempLowC != nil {
		m.tempC = defaultWarnTempFrac * math.Abs(*l.TempHighC-*l.TempLowC)
	}
	if w.TempC != nil {
		m.tempC = *w.TempC
	}
	if l.ChargeCurrent != nil {
		m.chargeA = defaultWarnCurrentFrac * math.Abs(*l.ChargeCurrent)
	}
	if l.DischargeCurrent != nil {
		m.dischargeA = defaultWarnCurrentFrac * math.Abs(*l.DischargeCurrent)
	}
	if w.CurrentA != nil {
		m.chargeA, m.dischargeA = *w.CurrentA, *w.CurrentA
	}
	if l.TempRiseCPerMin != nil {
		m.riseC = defaultWarnOtherFrac * math.Abs(*l.TempRiseCPerMin)
	}
	if l.TempSpreadC != nil {
		m.tempSpreadC = defaultWarnOtherFrac * math.Abs(*l.TempSpreadC)
	}
	for _, f := range []*float64{&m.cellV, &m.spreadV, &m.deviationV, &m.tempC, &m.chargeA, &m.dischargeA, &m.riseC, &m.tempSpreadC} {
		if !(*f >= 0) || math.IsInf(*f, 0) {
			*f = 0
		}
	}
	return m
}

// resolveLimits turns a profile's [limits], [warn] and [alarm] into one spec
// per limit.
func resolveLimits(p *config.Profile) [numLimits]limitSpec {
	trip, clear := int64(DefaultTripAfterNs), int64(DefaultClearAfterNs)
	if p.Alarm.TripAfterMs != nil && *p.Alarm.TripAfterMs >= 0 {
		trip = *p.Alarm.TripAfterMs * 1e6
	}
	if p.Alarm.ClearAfterMs != nil && *p.Alarm.ClearAfterMs >= 0 {
		clear = *p.Alarm.ClearAfterMs * 1e6
	}
	w := resolveWarn(p)
	l := &p.Limits
	var s [numLimits]limitSpec
	set := func(id LimitID, bound *float64, upper bool, warn float64) {
		if bound == nil || math.IsNaN(*bound) || math.IsInf(*bound, 0) {
			return
		}
		s[id] = limitSpec{set: true, bound: *bound, upper: upper,
			rule: TripRule{TripAfterNs: trip, ClearAfterNs: clear, Warn: warn}}
	}
	set(LimCellHigh, &l.CellHighV, true, w.cellV)
	set(LimCellLow, &l.CellLowV, false, w.cellV)
	set(LimSpread, l.SpreadV, true, w.spreadV)
	set(LimDeviation, l.DeviationV, true, w.deviationV)
	set(LimTempHigh, l.TempHighC, true, w.tempC)
	set(LimTempLow, l.TempLowC, false, w.tempC)
	set(LimChargeTempLow, l.ChargeTempLowC, false, w.tempC)
	set(LimChargeTempHigh, l.ChargeTempHighC, true, w.tempC)
	set(LimTempRise, l.TempRiseCPerMin, true, w.riseC)
	set(LimTempSpread, l.TempSpreadC, true, w.tempSpreadC)
	if l.ChargeCurrent != nil {
		a := math.Abs(*l.ChargeCurrent)
		set(LimChargeCurrent, &a, true, w.chargeA)
	}
	if l.DischargeCurrent != nil {
		a := -math.Abs(*l.DischargeCurrent)
		set(LimDischargeCurrent, &a, false, w.dischargeA)
	}
	return s
}
