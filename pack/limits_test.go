package pack

import (
	"math"
	"testing"

	"packwatch/config"
)

func f64(v float64) *float64 { return &v }

// The defaults are the project's own choice (documented on resolveWarn); the
// test pins them so a change is deliberate, with the spans of the example pack
// in PROFILE-SPEC.md.
func TestWarnDefaults(t *testing.T) {
	p := &config.Profile{Limits: config.Limits{
		CellHighV: 4.25, CellLowV: 3.00, SpreadV: f64(0.25), TempHighC: f64(50), TempLowC: f64(-10),
		ChargeTempLowC: f64(0), DischargeCurrent: f64(400), ChargeCurrent: f64(60),
		TempRiseCPerMin: f64(2), TempSpreadC: f64(8),
	}}
	s := resolveLimits(p)
	tests := []struct {
		id          LimitID
		bound, warn float64
		upper       bool
	}{
		{LimCellHigh, 4.25, 0.05, true},
		{LimCellLow, 3.00, 0.05, false},
		{LimSpread, 0.25, 0.05, true},
		{LimTempHigh, 50, 6, true},
		{LimTempLow, -10, 6, false},
		{LimChargeTempLow, 0, 6, false},
		{LimChargeCurrent, 60, 6, true},
		{LimDischargeCurrent, -400, 40, false},
		{LimTempRise, 2, 0.4, true},
		{LimTempSpread, 8, 1.6, true},
	}
	for _, tc := range tests {
		g := s[tc.id]
		if !g.set || g.bound != tc.bound || g.upper != tc.upper || math.Abs(g.rule.Warn-tc.warn) > 1e-12 {
			t.Errorf("%v: %+v, want bound %g warn %g upper %v", tc.id, g, tc.bound, tc.warn, tc.upper)
		}
		if g.rule.TripAfterNs != DefaultTripAfterNs || g.rule.ClearAfterNs != DefaultClearAfterNs {
			t.Errorf("%v: timing %d/%d, want the defaults", tc.id, g.rule.TripAfterNs, g.rule.ClearAfterNs)
		}
	}
	if s[LimDeviation].set || s[LimChargeTempHigh].set {
		t.Error("limits absent from the profile must not be checked")
	}
	// Given [warn] and [alarm] values win.
	trip, clear := int64(250), int64(500)
	p.Warn = config.Warn{CellV: f64(0.1), TempC: f64(3), CurrentA: f64(25), SpreadV: f64(0.02)}
	p.Alarm = config.Alarm{TripAfterMs: &trip, ClearAfterMs: &clear}
	s = resolveLimits(p)
	if s[LimCellLow].rule.Warn != 0.1 || s[LimTempHigh].rule.Warn != 3 || s[LimDischargeCurrent].rule.Warn != 25 ||
		s[LimSpread].rule.Warn != 0.02 || s[LimCellHigh].rule.TripAfterNs != 250e6 || s[LimCellHigh].rule.ClearAfterNs != 500e6 {
		t.Errorf("given [warn]/[alarm] not applied: %+v", s)
	}
	// Margins: positive inside, negative past, in the limit's unit.
	if m := s[LimCellHigh].margin(4.30); math.Abs(m+0.05) > 1e-12 {
		t.Errorf("cell 4.30 V against 4.25 V high: margin %g, want −0.05", m)
	}
	if m := s[LimDischargeCurrent].margin(-350); m != 50 {
		t.Errorf("−350 A against 400 A discharge: margin %g, want 50", m)
	}
}
