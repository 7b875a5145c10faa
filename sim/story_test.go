package sim

import (
	"math"
	"testing"
)

// storyRun runs a scenario on the model of a profile at step dt and records
// what the checks need.
type storyTrace struct {
	t        []float64
	i        []float64
	packV    []float64
	phase    []Phase
	step     []int
	minCell  []int // index of the lowest cell
	minV     []float64
	temps    [][]float64
	socOK    bool
	cvStart  float64 // time the CV phase began
	passEnd  float64
	chargeAs float64
}

func TestBuoyWinchStory(t *testing.T) {
	dm := loadMap(t, buoyProfile)
	p := dm.Profile()
	sc := BuoyWinchScenario()
	m, err := buildModel(p, sc, nil, 1)
	if err != nil {
		t.Fatal(err)
	}
	st := newStory(sc, m)
	const dt = 1.0
	var (
		tt                       float64
		cc, cv                   bool
		lastCV                   = math.Inf(1)
		chargeEndI               float64
		maxPackV                 float64
		bursts                   int
		inBurst                  bool
		endMinCell               = -1
		endMinV                  float64
		startDis                 []float64
		dischargeEndT, chargeEnd float64
	)
	for st.passes == 0 && tt < 48*3600 {
		prevStep := st.step
		st.tick(dt)
		tt += dt
		for k := range m.Cells {
			if z := m.Cells[k].SOC(); z < 0 || z > 1 {
				t.Fatalf("t=%g: cell %d SOC %g outside 0..1", tt, k+1, z)
			}
		}
		switch sc.Steps[prevStep].Kind {
		case "charge":
			if m.I > 20+1e-9 || m.I < 0 {
				t.Fatalf("t=%g: charge current %g A outside 0..20", tt, m.I)
			}
			if math.Abs(m.I-20) < 1e-9 {
				if cv {
					t.Fatalf("t=%g: back to constant current after the taper began", tt)
				}
				cc = true
			} else {
				cv = true
				if m.I > lastCV+1e-6 {
					t.Fatalf("t=%g: CV current rose from %g to %g A: the taper must fall", tt, lastCV, m.I)
				}
				lastCV = m.I
			}
			maxPackV = math.Max(maxPackV, m.PackVoltage(m.I))
			chargeEndI = m.I
			chargeEnd = tt
		case "discharge":
			if startDis == nil {
				startDis = append([]float64(nil), sensorTemps(m)...)
			}
			burst := m.I < -200
			if burst && !inBurst {
				bursts++
				if math.Abs(m.I+253) > 1e-9 {
					t.Fatalf("burst current %g A, want −253 (250 A pull over a 3 A draw)", m.I)
				}
			}
			inBurst = burst
			lo := math.Inf(1)
			for k := range m.Cells {
				if v := m.Cells[k].Voltage(m.I); v < lo {
					lo, endMinCell = v, k+1
				}
			}
			endMinV = lo
			dischargeEndT = tt
			if st.step != prevStep {
				// the discharge just ended: temperatures at the end
				temps := sensorTemps(m)
				if !(temps[2] > temps[0] && temps[2] > temps[1]) {
					t.Errorf("at the end of the pulls sensor 3 reads %.2f °C, sensors 1, 2 %.2f, %.2f: the busbar sensor should be warmest", temps[2], temps[0], temps[1])
				}
				rise3 := temps[2] - startDis[2]
				if !(rise3 > temps[0]-startDis[0] && rise3 > temps[1]-startDis[1]) {
					t.Errorf("sensor 3 rose %.2f K; it should rise most", rise3)
				}
			}
		}
	}
	if !cc || !cv {
		t.Fatalf("charge: constant current seen %v, taper seen %v", cc, cv)
	}
	if chargeEndI > 4+1e-9 || chargeEndI < 3 {
		t.Errorf("charge ended at %g A, want just below the 4 A cutoff", chargeEndI)
	}
	if maxPackV > 12*4.15+1e-6 {
		t.Errorf("pack reached %.4f V, above the charger's 12 × 4.15 V", maxPackV)
	}
	if endMinV > 3.05 || endMinV < 2.9 {
		t.Errorf("discharge ended with the lowest cell at %.4f V, want at the 3.05 V warning", endMinV)
	}
	if endMinCell != 7 {
		t.Errorf("lowest cell at the end is %d, want 7 (4 %% less capacity)", endMinCell)
	}
	if bursts < 50 {
		t.Errorf("only %d winch pulls", bursts)
	}
	t.Logf("story: charge ends %.2f h, discharge ends %.2f h after %d pulls, pass ends %.2f h; lowest cell %d at %.3f V",
		chargeEnd/3600, dischargeEndT/3600, bursts, tt/3600, endMinCell, endMinV)
	if st.passes != 1 || st.step != 0 || st.phase != PhaseIdle {
		t.Errorf("after a pass: passes %d step %d phase %v; want a loop back to the first rest", st.passes, st.step, st.phase)
	}
}

func sensorTemps(m *Model) []float64 {
	out := make([]float64, len(m.Sensors))
	for k := range m.Sensors {
		out[k] = m.Sensors[k].T
	}
	return out
}

// Charge conservation: the charge that flowed through the string equals
// each cell's change of state of charge × its capacity (η = 1), within 0.1 %
// (the criterion), over a whole pass with charge, taper and bursts.
func TestChargeConservation(t *testing.T) {
	dm := loadMap(t, buoyProfile)
	sc := BuoyWinchScenario()
	m, err := buildModel(dm.Profile(), sc, nil, 7)
	if err != nil {
		t.Fatal(err)
	}
	z0 := make([]float64, len(m.Cells))
	for k := range m.Cells {
		z0[k] = m.Cells[k].SOC()
	}
	st := newStory(sc, m)
	var absAs float64
	for n := 0; n < 30000; n++ { // into the discharge
		st.tick(1)
		absAs += math.Abs(m.I)
	}
	if st.step < 3 {
		t.Fatalf("still in step %d after 30000 s", st.step)
	}
	ah := m.ChargeAs / 3600
	for k := range m.Cells {
		c := &m.Cells[k]
		dz := (c.SOC() - z0[k]) * c.CapacityAh
		if math.Abs(dz-ah) > 0.001*math.Abs(ah) {
			t.Errorf("cell %d: ΔSOC×Q = %.4f Ah, ∫I dt = %.4f Ah", k+1, dz, ah)
		}
	}
	if absAs < 3600*100 {
		t.Errorf("only %g Ah moved; the check needs a real charge and discharge", absAs/3600)
	}
}

// The physical limits: a draw far beyond the cells' charge ends with every
// state of charge at or above 0, and a charge with no voltage limit stops at 1.
func TestPhysicalLimits(t *testing.T) {
	dm := loadMap(t, buoyProfile)
	sc := &Scenario{Name: "abuse", StartSOCPct: f64(5), End: "hold", Steps: []Step{
		{Kind: "discharge", CurrentA: 1000, For: Duration(3600e9)},
		{Kind: "charge", CurrentA: 500, CellV: 10, CutoffA: 1},
	}}
	if err := sc.Validate(); err != nil {
		t.Fatal(err)
	}
	m, err := buildModel(dm.Profile(), sc, nil, 3)
	if err != nil {
		t.Fatal(err)
	}
	st := newStory(sc, m)
	sawEmpty, sawFull := false, false
	for n := 0; n < 20000 && !st.holding; n++ {
		st.tick(1)
		for k := range m.Cells {
			z := m.Cells[k].SOC()
			if z < 0 || z > 1 {
				t.Fatalf("cell %d SOC %g", k+1, z)
			}
			sawEmpty = sawEmpty || z == 0
			sawFull = sawFull || z == 1
		}
	}
	if !sawEmpty || !sawFull {
		t.Errorf("empty reached %v, full reached %v; both steps should hit the physical bound", sawEmpty, sawFull)
	}
	if !st.holding {
		t.Error("the scenario should hold after its steps")
	}
}
