package sim

import (
	"math"
	"testing"
)

// Lumped thermal model after Bernardi, Pawlikowski, Newman, J. Electrochem.
// Soc. 132 (1985) (partial; REFERENCES.md): m 0.045 kg, cp 1000 J/(kg·K),
// h 10 W/(m²·K), A 0.0041846 m², 3 A through 30 mΩ → steady rise
// ΔT = I²R/(hA) = 6.4522 K, τ = m·cp/(hA) = 1075.37 s, ΔT(600 s) = 2.75908 K.
func TestThermalReference(t *testing.T) {
	const amb = 25.0
	for _, dt := range []float64{1, 0.1, 600, 7.5} {
		th := Thermal{HeatCap: 0.045 * 1000, HA: 10 * 0.0041846, T: amb}
		p := 3.0 * 3.0 * 0.030
		if d := th.SteadyRise(p); math.Abs(d-6.4522) > 5e-5 {
			t.Errorf("steady rise %g K, want 6.4522", d)
		}
		if tau := th.TimeConstant(); math.Abs(tau-1075.37) > 5e-3 {
			t.Errorf("time constant %g s, want 1075.37", tau)
		}
		for k := 0; k < int(math.Round(600/dt)); k++ {
			th.Step(p, amb, dt)
		}
		if d := th.T - amb; math.Abs(d-2.75908) > 5e-6 {
			t.Errorf("dt=%g: ΔT(600 s) = %.6f K, want 2.75908", dt, d)
		}
		for k := 0; k < 200; k++ {
			th.Step(p, amb, 100)
		}
		if d := th.T - amb; math.Abs(d-6.4522) > 5e-4 {
			t.Errorf("dt=%g: ΔT after 20600 s = %.5f K, want the steady 6.4522", dt, d)
		}
	}
}

// A cell model heated through SensorNode reaches the same steady state.
func TestModelHeatsSensor(t *testing.T) {
	ocv := constOCV(t, 3.7)
	m := &Model{AmbientC: 10, Contactor: true,
		Cells:   []Cell{{CapacityAh: 1e6, R0: 0.002, R1: 0.001, C1: 10000, OCV: ocv}},
		Sensors: []SensorNode{{Thermal: Thermal{HeatCap: 2000, HA: 1, T: 10}, Cells: []int{0}, ExtraOhm: 0.001}},
	}
	m.Cells[0].SetSOC(0.9)
	for k := 0; k < 40000; k++ {
		m.Step(-100, 1)
	}
	// I²(R0 + R1 + Rextra) = 10000 × 0.004 = 40 W over 1 W/K
	if got := m.Sensors[0].T; math.Abs(got-50) > 1e-3 {
		t.Errorf("steady temperature %g °C, want 50", got)
	}
}
