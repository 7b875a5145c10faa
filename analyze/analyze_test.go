package analyze

import (
	"encoding/json"
	"math"
	"strings"
	"testing"
)

// TestSyntheticSession analyses a session made from the simulator's one-RC
// cell model (Plett, Battery Management Systems Vol. I, ch. 2, from memory)
// with known capacity, resistances and rest-voltage curve, and checks the
// results against what the model knows: capacity within 1 %, R0 within 5 %,
// the knee within 0.03 V of where the knee rule puts it on the model's own
// curve (the rest-voltage table bends at 10 % left, 3 V per unit of charge
// against 0.6875 in the middle).
func TestSyntheticSession(t *testing.T) {
	s, tr := synthSession(t)
	rep := Analyze(s, Options{})

	var kinds []string
	for _, sg := range rep.Segments {
		kinds = append(kinds, string(sg.Kind))
	}
	want := "rest charge_cc charge_cv rest pulse rest discharge rest charge_cc charge_cv rest"
	if got := strings.Join(kinds, " "); got != want {
		t.Errorf("segments %q, want %q", got, want)
	}
	if !near(float64(rep.FullAtS), tr.fullAt, 0.2) || rep.FullFrom != "taper" {
		t.Errorf("full at %v s from %q, want %.1f s from the taper", rep.FullAtS, rep.FullFrom, tr.fullAt)
	}
	capTruth := (tr.fullChargeAs - tr.endChargeAs) / 3600
	if got := float64(rep.DischargeCapacityAh); !near(got, capTruth, 0.01*capTruth) {
		t.Errorf("discharge capacity %.4f Ah, model %.4f Ah (1 %%)", got, capTruth)
	}
	if got := float64(rep.ChargeCapacityAh); !near(got, (tr.rechargeAs-tr.endChargeAs)/3600, 0.01*capTruth) {
		t.Errorf("recharge %.4f Ah, model %.4f Ah", got, (tr.rechargeAs-tr.endChargeAs)/3600)
	}
	if got := float64(rep.CoulombicEff); !near(got, 1, 0.01) { // the model's charge efficiency is 1
		t.Errorf("coulombic efficiency %.4f, want 1 within 1 %%", got)
	}
	if e := float64(rep.EnergyEff); !(e > 0.9 && e < 1) {
		t.Errorf("energy efficiency %.4f: want below 1 (resistive loss) and above 0.9", e)
	}
	// the weak cell (95 % capacity) reaches the knee first: OCV 3.45 V at
	// 10 % left minus the steady drop 4 A × (R0 + R1)
	if rep.WeakestCell == nil || *rep.WeakestCell != 3 {
		t.Errorf("weakest cell %v, want 3", rep.WeakestCell)
	}
	kneeTruth := 3.45 - 4*(tr.cellR0[2]+tr.r1)
	if got := float64(rep.SuggestedCutoffVPerCell); !near(got, kneeTruth, 0.03) {
		t.Errorf("suggested cutoff %.4f V per cell, knee of the model's curve %.4f V (0.03 V)", got, kneeTruth)
	}
	belowTruth := tr.cellCap[2] * (0.10 - tr.weakZEnd)
	if got := float64(rep.AhBelowCutoff); !near(got, belowTruth, 0.1) {
		t.Errorf("Ah below the cutoff %.3f, model %.3f", got, belowTruth)
	}
	if !strings.Contains(rep.CutoffText, "V per cell at 0.2 C, 24 °C") || !strings.Contains(rep.KneeRule, "k = 3") {
		t.Errorf("cutoff text %q / rule %q do not state the current, temperature and k", rep.CutoffText, rep.KneeRule)
	}
	if !rep.KneeVPerCell.Valid() {
		t.Error("no knee on the pack curve")
	}

	// resistance at every step of 30 A or more
	packR0 := tr.cellR0[0]*3 + tr.cellR0[2] + tr.interconnect
	big := 0
	for _, p := range rep.Pulses {
		if math.Abs(float64(p.DeltaA)) < 30 {
			continue
		}
		big++
		if !near(float64(p.R0), packR0*1000, 0.05*packR0*1000) {
			t.Errorf("step at %.1f s: pack R0 %.3f mΩ, model %.3f mΩ (5 %%)", float64(p.T), float64(p.R0), packR0*1000)
		}
		for k, c := range p.Cells {
			if !near(float64(c.R0), tr.cellR0[k]*1000, 0.05*tr.cellR0[k]*1000) {
				t.Errorf("step at %.1f s: cell %d R0 %.3f mΩ, model %.3f mΩ (5 %%)", float64(p.T), k+1, float64(c.R0), tr.cellR0[k]*1000)
			}
			if c.Outlier != (k == 2) {
				t.Errorf("step at %.1f s: cell %d outlier = %v", float64(p.T), k+1, c.Outlier)
			}
		}
		if !near(float64(p.InterconnectR0), tr.interconnect*1000, 0.05*packR0*1000) {
			t.Errorf("step at %.1f s: interconnect %.3f mΩ, model %.3f mΩ", float64(p.T), float64(p.InterconnectR0), tr.interconnect*1000)
		}
		soc := float64(p.SOCPct)
		if !(soc >= 0 && soc <= 100) {
			t.Errorf("step at %.1f s: SOC %v", float64(p.T), p.SOCPct)
		}
		if !near(float64(p.TempC), 24, 0.5) {
			t.Errorf("step at %.1f s: temperature %v, want 24 °C", float64(p.T), p.TempC)
		}
		// a down-step in the middle of the discharge, from a settled
		// current: after 10 s the model gives R0 + R1·(1 − e^(−10/τ)) plus
		// the rest voltage's fall over the charge drawn in the 10 s
		if p.Method == MethodTwoLevel && float64(p.DeltaA) < 0 && soc > 20 && soc < 85 {
			tau := tr.r1 * tr.c1
			slope := 0.6875 / tr.cellCap[0] // V per Ah in the middle of the table
			want := tr.cellR0[0] + tr.r1*(1-math.Exp(-10/tau)) + slope*(40*10/3600.0)/36
			if got := float64(p.Cells[0].R10s) / 1000; !near(got, want, 0.05*want) {
				t.Errorf("step at %.1f s: cell 1 R10s %.4f mΩ, model %.4f mΩ", float64(p.T), got*1000, want*1000)
			}
			want1 := tr.cellR0[0] + tr.r1*(1-math.Exp(-1/tau))
			if got := float64(p.Cells[0].R1s) / 1000; !near(got, want1, 0.05*want1) {
				t.Errorf("step at %.1f s: cell 1 R1s %.4f mΩ, model %.4f mΩ", float64(p.T), got*1000, want1*1000)
			}
		}
	}
	if big < len(tr.stepTimes) {
		t.Errorf("%d steps of 30 A or more measured, the session has %d up and %d down", big, len(tr.stepTimes), len(tr.stepTimes)-1)
	}
	sum := rep.Resistance
	if !near(float64(sum.Pack.R0), packR0*1000, 0.05*packR0*1000) || len(sum.Cells) != 4 || !sum.Cells[2].Outlier || sum.Cells[0].Outlier {
		t.Errorf("resistance summary %+v", sum)
	}
	if len(rep.Pulses) == 0 || rep.Pulses[0].Method != MethodPulse {
		t.Errorf("the first pulse should be a pulse from rest")
	}
	foundShort := false
	for _, r := range rep.Rejected {
		if r.Reason == "" {
			t.Errorf("rejected step at %v without a reason", r.T)
		}
		foundShort = foundShort || strings.HasPrefix(r.Reason, "too short")
	}
	if !foundShort {
		t.Errorf("the end of the 10 s pulse should be rejected as too short: %+v", rep.Rejected)
	}
	// the curves carry their current and temperature
	if len(rep.Curves) != 3*5 {
		t.Errorf("%d curves, want 3 runs × (pack + 4 cells)", len(rep.Curves))
	}
	for _, c := range rep.Curves {
		if c.Kind == Discharge && (!near(float64(c.CRate), 0.2, 0.05) || !near(float64(c.MeanTemp), 24, 0.5)) {
			t.Errorf("discharge curve %s: %.3f C, %.1f °C", c.Label, float64(c.CRate), float64(c.MeanTemp))
		}
	}
	// the report serialises (no NaN reaches JSON)
	if _, err := json.Marshal(rep); err != nil {
		t.Fatalf("json: %v", err)
	}
}
