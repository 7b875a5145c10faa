package config

import (
	"fmt"
	"strconv"
)

// chemistryWindow is the usual cell voltage window per chemistry, for a
// warning when limits sit outside it. Common practice, no source; values from
// memory: NMC and NCA 2.5–4.25 V, LCO 2.75–4.25 V, LFP 2.0–3.65 V.
var chemistryWindow = map[string][2]float64{
	"nmc": {2.5, 4.25},
	"nca": {2.5, 4.25},
	"lco": {2.75, 4.25},
	"lfp": {2.0, 3.65},
}

var sourceKinds = []string{"socketcan", "serial-can", "serial-text", "tcp-can"}

// slcanBitrates are the bitrates the serial-line CAN protocol can set (S0..S8).
var slcanBitrates = []int{10000, 20000, 50000, 100000, 125000, 250000, 500000, 800000, 1000000}

func validate(p *Profile, r *reporter) {
	// [pack]
	if p.Pack.Name == "" {
		r.keyErrorf("pack", ErrMissing, `add name = "…" under [pack]`, "[pack] name is required")
	}
	if p.Pack.Cells <= 0 {
		r.errorf("pack.cells", ErrMissing, "cells is the number of cells in series, 1 or more", "[pack] cells is required and must be at least 1")
	} else if p.Pack.Cells > 1024 {
		r.errorf("pack.cells", ErrRange, "packwatch shows at most 1024 cells in one profile", "[pack] cells = %d is too many", p.Pack.Cells)
	}
	if p.Pack.Sensors < 0 || p.Pack.Sensors > 1024 {
		r.errorf("pack.temp_sensors", ErrRange, "0 to 1024", "[pack] temp_sensors = %d is out of range", p.Pack.Sensors)
	}
	if p.Pack.CapacityAh <= 0 {
		r.errorf("pack.capacity_ah", ErrMissing, "the rated capacity in amp-hours, used for state of charge", "[pack] capacity_ah is required and must be above 0")
	}
	if p.Pack.Chemistry != "" {
		if _, ok := chemistryWindow[p.Pack.Chemistry]; !ok {
			r.errorf("pack.chemistry", ErrRange, "one of nmc, nca, lco, lfp", "unknown chemistry %q", p.Pack.Chemistry)
		}
	}

	// [limits]
	l := &p.Limits
	if l.CellHighV == 0 {
		r.keyErrorf("limits", ErrMissing, "cell_high_v is where the BMS trips on a high cell, in volts", "[limits] cell_high_v is required")
	}
	if l.CellLowV == 0 {
		r.keyErrorf("limits", ErrMissing, "cell_low_v is where the BMS trips on a low cell, in volts", "[limits] cell_low_v is required")
	}
	if l.CellHighV != 0 && l.CellLowV != 0 && l.CellLowV >= l.CellHighV {
		r.errorf("limits.cell_low_v", ErrConflict, "cell_low_v must be below cell_high_v", "cell_low_v %.3g V is not below cell_high_v %.3g V", l.CellLowV, l.CellHighV)
	}
	pairs := []struct {
		lowKey, highKey string
		low, high       *float64
	}{
		{"temp_low_c", "temp_high_c", l.TempLowC, l.TempHighC},
		{"charge_temp_low_c", "charge_temp_high_c", l.ChargeTempLowC, l.ChargeTempHighC},
	}
	for _, pr := range pairs {
		if pr.low != nil && pr.high != nil && *pr.low >= *pr.high {
			r.errorf("limits."+pr.lowKey, ErrConflict, pr.lowKey+" must be below "+pr.highKey, "%s %g is not below %s %g", pr.lowKey, *pr.low, pr.highKey, *pr.high)
		}
	}
	for _, pos := range []struct {
		key string
		v   *float64
	}{{"spread_v", l.SpreadV}, {"deviation_v", l.DeviationV}, {"discharge_current_a", l.DischargeCurrent}, {"charge_current_a", l.ChargeCurrent}, {"temp_rise_c_per_min", l.TempRiseCPerMin}, {"temp_spread_c", l.TempSpreadC}} {
		if pos.v != nil && *pos.v <= 0 {
			r.errorf("limits."+pos.key, ErrRange, "write it as a positive number; the sign is implied", "%s must be above 0", pos.key)
		}
	}
	chem := p.Pack.Chemistry
	if chem == "" {
		chem = "nmc"
	}
	if w, ok := chemistryWindow[chem]; ok && l.CellHighV != 0 && l.CellLowV != 0 {
		if l.CellHighV > w[1]+0.05 {
			r.warnf("limits.cell_high_v", "check the cell maker's data sheet", "cell_high_v %.3g V is above the usual %.3g V for %s", l.CellHighV, w[1], chem)
		}
		if l.CellLowV < w[0]-0.05 {
			r.warnf("limits.cell_low_v", "check the cell maker's data sheet", "cell_low_v %.3g V is below the usual %.3g V for %s", l.CellLowV, w[0], chem)
		}
	}

	// [warn]: a margin wider than half its window leaves no "ok" band.
	if wv := p.Warn.CellV; wv != nil {
		if *wv < 0 {
			r.errorf("warn.cell_v", ErrRange, "a distance in volts, 0 or more", "warn.cell_v must not be negative")
		} else if l.CellHighV > l.CellLowV && 2**wv >= l.CellHighV-l.CellLowV {
			r.errorf("warn.cell_v", ErrConflict, fmt.Sprintf("keep it under half the window, below %.3g V", (l.CellHighV-l.CellLowV)/2), "warn.cell_v %.3g V is as wide as the cell window %.3g..%.3g V", *wv, l.CellLowV, l.CellHighV)
		}
	}
	if wt := p.Warn.TempC; wt != nil && l.TempLowC != nil && l.TempHighC != nil && 2**wt >= *l.TempHighC-*l.TempLowC {
		r.errorf("warn.temp_c", ErrConflict, "keep it under half the temperature window", "warn.temp_c %g is as wide as the window %g..%g °C", *wt, *l.TempLowC, *l.TempHighC)
	}
	if ws := p.Warn.SpreadV; ws != nil && l.SpreadV != nil && *ws >= *l.SpreadV {
		r.errorf("warn.spread_v", ErrConflict, "the warning must come before the trip: make it smaller than limits.spread_v", "warn.spread_v %g V is not below limits.spread_v %g V", *ws, *l.SpreadV)
	}
	if wc := p.Warn.CurrentA; wc != nil && *wc < 0 {
		r.errorf("warn.current_a", ErrRange, "a distance in amperes", "warn.current_a must not be negative")
	}

	// [alarm]
	if a := p.Alarm.TripAfterMs; a != nil && *a < 0 {
		r.errorf("alarm.trip_after_ms", ErrRange, "milliseconds, 0 or more", "trip_after_ms must not be negative")
	}
	if a := p.Alarm.ClearAfterMs; a != nil && *a < 0 {
		r.errorf("alarm.clear_after_ms", ErrRange, "milliseconds, 0 or more", "clear_after_ms must not be negative")
	}

	// [soc]
	switch s := p.SOC.Start.(type) {
	case nil:
	case string:
		if s != "rest" && s != "full" && s != "bms" {
			if _, err := strconv.ParseFloat(s, 64); err != nil {
				r.errorf("soc.start", ErrRange, `"rest", "full", "bms" or a percentage such as 80`, "soc.start %q is not known", s)
			}
		}
	case int64, float64:
		if v := toFloat(s); v < 0 || v > 100 {
			r.errorf("soc.start", ErrRange, "a percentage from 0 to 100", "soc.start %v is outside 0..100", v)
		}
	default:
		r.errorf("soc.start", ErrType, `"rest", "full", "bms" or a percentage such as 80`, "soc.start has the wrong type")
	}
	if e := p.SOC.ChargeEfficiency; e != nil && (*e <= 0 || *e > 1) {
		r.errorf("soc.charge_efficiency", ErrRange, "a ratio such as 0.995", "charge_efficiency must be in (0, 1]")
	}

	// [[sensor]]
	for i, s := range p.Sensors {
		path := fmt.Sprintf("sensor[%d]", i)
		if s.N < 1 || s.N > p.Pack.Sensors {
			r.errorf(path+".n", ErrRange, "raise [pack] temp_sensors or fix n", "sensor n = %d is outside 1..%d (the pack's temp_sensors)", s.N, p.Pack.Sensors)
		}
		switch s.Role {
		case "", "cell", "busbar", "ambient", "coolant":
		default:
			r.errorf(path+".role", ErrRange, "one of cell, busbar, ambient, coolant", "unknown sensor role %q", s.Role)
		}
	}

	// [[source]]
	if len(p.Sources) == 0 {
		r.add(&Problem{Pos: Pos{1, 1}, Msg: "no [[source]]: packwatch needs at least one place to read from", Hint: "add [[source]] with name, kind and device", Err: ErrMissing})
	}
	names := map[string]int{}
	for i := range p.Sources {
		s := &p.Sources[i]
		path := fmt.Sprintf("source[%d]", i)
		if s.Name == "" {
			r.keyErrorf(path, ErrMissing, `add name = "bms" (frames and lines refer to it)`, "source needs a name")
		} else if prev, dup := names[s.Name]; dup {
			r.errorf(path+".name", ErrConflict, "give each source its own name", "source name %q is already used by source[%d]", s.Name, prev)
		} else {
			names[s.Name] = i
		}
		if !contains(sourceKinds, s.Kind) {
			hint := "one of socketcan, serial-can, serial-text, tcp-can"
			if c := closest(s.Kind, sourceKinds); c != "" {
				hint = fmt.Sprintf("did you mean %q?", c)
			}
			r.errorf(path+".kind", ErrRange, hint, "unknown source kind %q", s.Kind)
		}
		if s.Device == "" {
			r.keyErrorf(path, ErrMissing, "an interface (can0), a port (/dev/ttyUSB0, COM4, usb:VID:PID[:SERIAL]) or host:port for tcp-can", "source %q needs a device", s.Name)
		}
		switch s.Mode {
		case "", "listen", "normal":
		default:
			r.errorf(path+".mode", ErrRange, `"listen" (default, never transmits) or "normal" (acknowledges frames; bench only)`, "unknown mode %q", s.Mode)
		}
		if s.Baud < 0 {
			r.errorf(path+".baud", ErrRange, "115200 is the usual console rate", "baud must be positive")
		}
		if s.DataBits != 0 && (s.DataBits < 5 || s.DataBits > 8) {
			r.errorf(path+".data_bits", ErrRange, "5, 6, 7 or 8", "data_bits %d is not possible", s.DataBits)
		}
		switch s.Parity {
		case "", "none", "even", "odd", "mark", "space":
		default:
			r.errorf(path+".parity", ErrRange, "none, even, odd, mark or space", "unknown parity %q", s.Parity)
		}
		switch s.StopBits {
		case "", "1", "1.5", "2":
		default:
			r.errorf(path+".stop_bits", ErrRange, `"1", "1.5" or "2"`, "unknown stop_bits %q", s.StopBits)
		}
		if s.Kind == "serial-can" && s.Bitrate != 0 && !containsInt(slcanBitrates, s.Bitrate) {
			r.errorf(path+".bitrate", ErrRange, "serial-line CAN adapters set 10k, 20k, 50k, 100k, 125k, 250k, 500k, 800k or 1M (S0..S8)", "bitrate %d cannot be set on a serial-line CAN adapter", s.Bitrate)
		}
		if s.Bitrate < 0 || s.Bitrate > 1000000 {
			r.errorf(path+".bitrate", ErrRange, "classical CAN runs up to 1,000,000 bit/s", "bitrate %d is out of range", s.Bitrate)
		}
	}
}

func containsInt(list []int, v int) bool {
	for _, x := range list {
		if x == v {
			return true
		}
	}
	return false
}

func toFloat(v any) float64 {
	switch x := v.(type) {
	case int64:
		return float64(x)
	case float64:
		return x
	}
	return 0
}
