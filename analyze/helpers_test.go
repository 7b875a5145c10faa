package analyze

import (
	"math"
	"sync"
	"testing"

	"packwatch/analyze/synthtest"
	"packwatch/config"
	"packwatch/decode"
)

// compile loads a test profile.
func compile(t testing.TB, path string) *decode.Map {
	t.Helper()
	p, err := config.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	m, err := decode.Compile(p)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// truth is what the synthetic session's model knows.
type truth struct {
	cellCap       [4]float64 // Ah
	cellR0        [4]float64 // Ω
	r1, c1        float64
	interconnect  float64 // Ω
	fullChargeAs  float64 // model's ∫I dt at the end of the first taper, A·s
	endChargeAs   float64 // at the end of the discharge
	rechargeAs    float64 // at the end of the recharge taper
	weakZEnd      float64 // the weak cell's SOC at the end of the discharge
	stepTimes     []float64
	dischargeA    float64
	fullAt, endAt float64
}

var (
	synthOnce sync.Once
	synthS    *Session
	synthT    truth
)

// synthSession builds (once per test binary) a 4-cell string from the
// simulator's one-RC cell model: a rest, a CC-CV charge, a 10 s 40 A pulse
// from rest, a C/5 discharge with a 20 s 40 A step every 30 min to 3.0 V on
// the weakest cell, a rest and a CC-CV recharge. Cell 3 has 95 % of the
// capacity and 1.8 × the R0 of the others; 1 mΩ sits outside the cells.
func synthSession(t testing.TB) (*Session, truth) {
	t.Helper()
	synthOnce.Do(func() {
		m := compile(t, "testdata/string4.toml")
		c := NewCollector(m)
		tr := truth{r1: 0.001, c1: 20000, interconnect: 0.001, dischargeA: -4}
		p := synthtest.New(4, 20, 0.002, tr.r1, tr.c1, synthtest.KneeOCV(), 0.6)
		p.Model.Cells[2].CapacityAh *= 0.95
		p.Model.Cells[2].R0 *= 1.8
		p.Model.Cells[2].SetSOC(1 - 0.4/0.95) // balanced at the top: as much room to full as the others
		for k := range p.Model.Cells {
			tr.cellCap[k] = p.Model.Cells[k].CapacityAh
			tr.cellR0[k] = p.Model.Cells[k].R0
		}
		p.InterconnectOhm = tr.interconnect
		p.Emit = c.Add
		p.Hold(0, 120)
		p.ChargeCCCV(10, 4.15, 1, 4*3600)
		tr.fullChargeAs, tr.fullAt = p.Model.ChargeAs, p.T()
		p.Hold(0, 600)
		tr.stepTimes = append(tr.stepTimes, p.T())
		p.Hold(-40, 10)
		p.Hold(0, 300)
		for k := 0; k < 20; k++ {
			p.DischargeUntil(tr.dischargeA, 3.0, 1800)
			if lo, _ := p.Model.CellVoltageRange(tr.dischargeA); lo <= 3.0 {
				break
			}
			tr.stepTimes = append(tr.stepTimes, p.T())
			p.Hold(-40, 20)
		}
		tr.endChargeAs, tr.endAt = p.Model.ChargeAs, p.T()
		tr.weakZEnd = p.Model.Cells[2].SOC()
		p.Hold(0, 600)
		p.ChargeCCCV(10, 4.15, 1, 6*3600)
		tr.rechargeAs = p.Model.ChargeAs
		p.Hold(0, 300)
		p.Flush()
		synthS, synthT = c.Session(), tr
	})
	if synthS == nil {
		t.Fatal("synthetic session failed to build")
	}
	return synthS, synthT
}

// near reports |got − want| ≤ tol.
func near(got, want, tol float64) bool { return math.Abs(got-want) <= tol }
