package check

import (
	"math"
	"testing"

	"packwatch/config"
)

// Defaults of the example profile worked out by hand from its [limits] and
// [warn] and the rules in settings.go.
func TestResolveExample(t *testing.T) {
	p, err := config.Load("../config/examples/buoy-winch.toml")
	if err != nil {
		t.Fatal(err)
	}
	s := Resolve(p)
	want := map[string]float64{
		"min_soc_pct":         20,
		"min_cell_margin_v":   0.05, // [warn] cell_v
		"max_spread_v":        0.05, // 0.25 − 0.05 = 0.20, capped at the resting 0.050
		"max_rest_current_a":  3.6,  // 180 Ah / 50
		"temp_low_c":          -5,   // −10 + 5
		"temp_high_c":         45,   // 50 − 5
		"charge_temp_low_c":   5,    // 0 + 5
		"charge_temp_high_c":  45,   // no limit: 45, within the discharge window
		"min_rate_hz.bms":     16,   // (10 + 20 + 2) Hz / 2
		"min_rate_hz.console": 0.5,  // 1 Hz / 2
	}
	got := map[string]Setting{}
	for _, x := range s.List() {
		got[x.Key] = x
	}
	for k, v := range want {
		x, ok := got[k]
		if !ok || math.Abs(x.Value-v) > 1e-9 || !x.Default || x.From == "" {
			t.Errorf("%s: %+v, want default %v", k, x, v)
		}
	}
	if len(got) != len(want) {
		t.Errorf("settings %v", got)
	}
}

func TestResolveCheckSection(t *testing.T) {
	p, err := config.Load("testdata/pod.toml")
	if err != nil {
		t.Fatal(err)
	}
	s := Resolve(p)
	if s.MinSOCPct.Value != 30 || s.MinSOCPct.Default || s.MaxSpreadV.Value != 0.04 || s.MaxSpreadV.Default {
		t.Errorf("check keys not taken: %+v %+v", s.MinSOCPct, s.MaxSpreadV)
	}
	if len(s.Manual) != 2 || s.Manual[0] != "connector latched and locked" {
		t.Errorf("manual %v", s.Manual)
	}
	// 4 % of 3.00–4.20 V = 0.048 V; warning band of the temperature window 10 % of 65 °C.
	if math.Abs(s.MinCellMarginV.Value-0.048) > 1e-9 || math.Abs(s.TempHighC.Value-48.5) > 1e-9 || math.Abs(s.TempLowC.Value+3.5) > 1e-9 {
		t.Errorf("margin %v temp %v…%v", s.MinCellMarginV.Value, s.TempLowC.Value, s.TempHighC.Value)
	}
	five := 5.0
	p.Check.MinRateHz = &five
	s = Resolve(p)
	if len(s.Rates) != 2 || s.Rates[0].Min.Value != 5 || s.Rates[0].Min.Default {
		t.Errorf("rates %+v", s.Rates)
	}
	// Without limits beyond the cell window: packwatch's defaults.
	bare := &config.Profile{Pack: config.Pack{CapacityAh: 10}, Limits: config.Limits{CellHighV: 3.65, CellLowV: 2.5}}
	s = Resolve(bare)
	if s.TempLowC.Value != DefaultTempLowC || s.TempHighC.Value != DefaultTempHighC || s.MaxSpreadV.Value != DefaultMaxSpreadV ||
		s.MaxRestCurrentA.Value != DefaultMinRestCurrent || s.ChargeTempLowC.Value != 0 || s.ChargeTempHighC.Value != 45 {
		t.Errorf("bare defaults %+v", s)
	}
}
