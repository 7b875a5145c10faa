package check

import (
	"fmt"
	"math"

	"packwatch/config"
)

// Setting is one requirement of the check with where it came from.
type Setting struct {
	Key     string  `json:"key"`   // the [check] key, e.g. "min_soc_pct"; rate keys are "min_rate_hz.SOURCE"
	Value   float64 `json:"value"` // in the unit the key names
	Unit    string  `json:"unit"`
	Default bool    `json:"default"`        // true: not in [check], derived as From says
	From    string  `json:"from,omitempty"` // how a default was derived, in words
}

// SourceRate is the minimum message rate of one source.
type SourceRate struct {
	Source string
	Min    Setting
}

// Settings are the resolved requirements of a profile's check: the [check]
// section with every absent key filled with its default. Resolve makes them.
type Settings struct {
	MinSOCPct       Setting
	MinCellMarginV  Setting
	CellLowV        float64 // [limits] cell_low_v
	CellHighV       float64 // [limits] cell_high_v
	MaxSpreadV      Setting
	MaxRestCurrentA Setting
	TempLowC        Setting
	TempHighC       Setting
	ChargeTempLowC  Setting
	ChargeTempHighC Setting
	Rates           []SourceRate
	// Manual are the checklist items the operator confirms by hand.
	Manual []string
}

// Defaults used when neither [check] nor [limits] gives a value. Each is a
// decision of this package, listed in the report as a default:
//
//   - min_soc_pct 20 %: a pack sent out below a fifth of its charge leaves
//     little for the return (common practice, no source);
//   - max_spread_v at most 0.050 V: more than 50 mV between the cells of a
//     resting pack points to a weak or unbalanced cell, whatever the spread
//     limit of the protection (which guards the pack under load) allows
//     (common practice, no source);
//   - max_rest_current_a: C/50 (2 % of capacity_ah per hour), at least
//     0.5 A: a pack that is to rest draws no more (our choice);
//   - discharge window −20…60 °C and charge window 0…45 °C without limits:
//     the usual datasheet windows of Li-ion cells (from memory, no source);
//   - min_rate_hz: half the rate the profile's frames and lines promise
//     (their period_ms), per source (our choice).
const (
	DefaultMinSOCPct      = 20.0
	DefaultMaxSpreadV     = 0.050
	DefaultRestCRate      = 0.02
	DefaultMinRestCurrent = 0.5
	DefaultTempLowC       = -20.0
	DefaultTempHighC      = 60.0
	DefaultChargeLowC     = 0.0
	DefaultChargeHighC    = 45.0
	DefaultRateFraction   = 0.5
)

// Warn-margin defaults, the same rules the pack engine applies to [warn]
// (pack/limits.go): the check's default requirements sit at the edge of the
// warning band, so a pack in a warning is not fit to go.
const (
	warnCellFrac   = 0.04
	warnSpreadFrac = 0.20
	warnTempFrac   = 0.10
	warnTempC      = 5.0
)

// Resolve derives the check's settings from a profile: each [check] key as
// given, each absent key from the limits (the edge of their warning band)
// or, without a limit, from the package defaults. Values that are not
// finite are treated as absent.
func Resolve(p *config.Profile) Settings {
	c, l, w := &p.Check, &p.Limits, &p.Warn
	s := Settings{CellLowV: l.CellLowV, CellHighV: l.CellHighV, Manual: append([]string(nil), c.Manual...)}

	s.MinSOCPct = pick("min_soc_pct", "%", c.MinSOCPct, DefaultMinSOCPct, "packwatch default")

	cellWarn := warnCellFrac * math.Abs(l.CellHighV-l.CellLowV)
	cellFrom := fmt.Sprintf("warning band: 4 %% of the cell window %.3g–%.3g V", l.CellLowV, l.CellHighV)
	if ok(w.CellV) {
		cellWarn, cellFrom = *w.CellV, "[warn] cell_v"
	}
	s.MinCellMarginV = pick("min_cell_margin_v", "V", c.MinCellMarginV, cellWarn, cellFrom)

	if ok(l.SpreadV) {
		sw := warnSpreadFrac * math.Abs(*l.SpreadV)
		from := fmt.Sprintf("[limits] spread_v %.3g V less its 20 %% warning band", *l.SpreadV)
		if ok(w.SpreadV) {
			sw, from = *w.SpreadV, fmt.Sprintf("[limits] spread_v %.3g V less [warn] spread_v", *l.SpreadV)
		}
		v := *l.SpreadV - sw
		if v > DefaultMaxSpreadV {
			v, from = DefaultMaxSpreadV, fmt.Sprintf("packwatch's resting maximum, tighter than [limits] spread_v %.3g V less its warning band", *l.SpreadV)
		}
		s.MaxSpreadV = pick("max_spread_v", "V", c.MaxSpreadV, v, from)
	} else {
		s.MaxSpreadV = pick("max_spread_v", "V", c.MaxSpreadV, DefaultMaxSpreadV, "packwatch default (no spread limit)")
	}

	rest := math.Max(DefaultRestCRate*p.Pack.CapacityAh, DefaultMinRestCurrent)
	s.MaxRestCurrentA = pick("max_rest_current_a", "A", c.MaxRestCurrentA, rest,
		fmt.Sprintf("C/50 of %.4g Ah, at least %.2g A", p.Pack.CapacityAh, DefaultMinRestCurrent))

	tw := warnTempC
	if ok(l.TempHighC) && ok(l.TempLowC) {
		tw = warnTempFrac * math.Abs(*l.TempHighC-*l.TempLowC)
	}
	if ok(w.TempC) {
		tw = *w.TempC
	}
	s.TempLowC = pickLimit("temp_low_c", c.TempLowC, l.TempLowC, tw, DefaultTempLowC, "temp_low_c")
	s.TempHighC = pickLimit("temp_high_c", c.TempHighC, l.TempHighC, -tw, DefaultTempHighC, "temp_high_c")
	// The charge window has no [check] key: it follows the limits, else
	// the usual window clipped to the discharge window.
	s.ChargeTempLowC = pickLimit("charge_temp_low_c", nil, l.ChargeTempLowC, tw, math.Max(DefaultChargeLowC, s.TempLowC.Value), "charge_temp_low_c")
	s.ChargeTempHighC = pickLimit("charge_temp_high_c", nil, l.ChargeTempHighC, -tw, math.Min(DefaultChargeHighC, s.TempHighC.Value), "charge_temp_high_c")

	exp := expectedRates(p)
	for i, src := range p.Sources {
		key := "min_rate_hz." + src.Name
		var st Setting
		switch {
		case ok(c.MinRateHz):
			st = Setting{Key: key, Value: *c.MinRateHz, Unit: "Hz"}
		case exp[i] > 0:
			st = Setting{Key: key, Value: DefaultRateFraction * exp[i], Unit: "Hz", Default: true,
				From: fmt.Sprintf("half the %.4g Hz the profile's frames and lines promise", exp[i])}
		default:
			continue // nothing expected from this source
		}
		s.Rates = append(s.Rates, SourceRate{Source: src.Name, Min: st})
	}
	return s
}

// List gives every setting in report order.
func (s *Settings) List() []Setting {
	out := []Setting{s.MinSOCPct, s.MinCellMarginV, s.MaxSpreadV, s.MaxRestCurrentA,
		s.TempLowC, s.TempHighC, s.ChargeTempLowC, s.ChargeTempHighC}
	for _, r := range s.Rates {
		out = append(out, r.Min)
	}
	return out
}

func ok(p *float64) bool { return p != nil && !math.IsNaN(*p) && !math.IsInf(*p, 0) }

func pick(key, unit string, v *float64, def float64, from string) Setting {
	if ok(v) {
		return Setting{Key: key, Value: *v, Unit: unit}
	}
	return Setting{Key: key, Value: def, Unit: unit, Default: true, From: from}
}

// pickLimit takes the [check] key, else the limit moved inside by warn,
// else def.
func pickLimit(key string, v, limit *float64, warn, def float64, limitKey string) Setting {
	if ok(v) {
		return Setting{Key: key, Value: *v, Unit: "°C"}
	}
	if ok(limit) {
		return Setting{Key: key, Value: *limit + warn, Unit: "°C", Default: true,
			From: fmt.Sprintf("[limits] %s %.3g °C, inside by its %.3g °C warning band", limitKey, *limit, math.Abs(warn))}
	}
	return Setting{Key: key, Value: def, Unit: "°C", Default: true, From: "packwatch default (no limit)"}
}

// expectedRates is, per source index, the message rate the profile's frames
// and lines promise: each [[frame]] and [[line]] once per period_ms (1000 by
// default). A line pattern that matches several lines per period (one per
// cell) promises more; counting it once keeps the default on the low side.
func expectedRates(p *config.Profile) []float64 {
	out := make([]float64, len(p.Sources))
	firstCAN, firstText := -1, -1
	idx := map[string]int{}
	for i, s := range p.Sources {
		idx[s.Name] = i
		if s.Kind == "serial-text" {
			if firstText < 0 {
				firstText = i
			}
		} else if firstCAN < 0 {
			firstCAN = i
		}
	}
	add := func(name string, def int, periodMs int64) {
		i := def
		if name != "" {
			j, found := idx[name]
			if !found {
				return
			}
			i = j
		}
		if i < 0 {
			return
		}
		if periodMs <= 0 {
			periodMs = 1000
		}
		out[i] += 1000 / float64(periodMs)
	}
	for _, f := range p.Frames {
		add(f.Source, firstCAN, f.PeriodMs)
	}
	for _, l := range p.Lines {
		add(l.Source, firstText, l.PeriodMs)
	}
	return out
}
