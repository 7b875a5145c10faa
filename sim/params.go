package sim

import (
	"fmt"
	"math"
	"math/rand/v2"

	"packwatch/config"
)

// Cell and thermal parameters scaled from a cell's capacity. Typical values
// for NMC/graphite cells, from memory: R0 about 0.5–2 mΩ for 50–100 Ah cells,
// RC time constants of 10–100 s, about 250 Wh/kg, cp near 1000 J/(kg·K);
// h of a few W/(m²·K) in a closed enclosure (values from memory, for the
// demo only).
const (
	r0OhmAh      = 0.1    // R0 = r0OhmAh / Q: 1 mΩ at 100 Ah
	r1OfR0       = 0.5    // R1 = 0.5 R0
	tau1         = 30.0   // R1·C1, s
	kgPerAh      = 0.0146 // 3.65 Wh/Ah at 250 Wh/kg
	cpJPerKgK    = 1000.0
	areaM2At180  = 0.08 // cooled surface of a 180 Ah prismatic cell
	hWPerM2K     = 5.0
	chargeEta    = 1.0   // the simulated cells store every coulomb
	capSpread    = 0.003 // manufacturing spread of capacity, ± fraction
	r0Spread     = 0.03  // and of R0
	hotSensorUpC = 5.0   // hot-sensor fault: this far past temp_high_c
)

// buildModel makes the model of a profile's pack under a scenario and faults.
func buildModel(p *config.Profile, sc *Scenario, faults []Fault, seed uint64) (*Model, error) {
	n := p.Pack.Cells
	if n < 1 {
		return nil, fmt.Errorf("profile has %d cells; the simulator needs at least one", n)
	}
	q := p.Pack.CapacityAh
	if !(q > 0) {
		return nil, fmt.Errorf("profile capacity_ah = %g; the simulator needs a positive capacity", q)
	}
	ocv, err := ChemistryOCV(p.Pack.Chemistry)
	if err != nil {
		return nil, err
	}
	rng := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	amb := 20.0
	if sc.AmbientC != nil {
		amb = *sc.AmbientC
	}
	z0 := 0.5
	if sc.StartSOCPct != nil {
		z0 = *sc.StartSOCPct / 100
	}
	for _, f := range faults {
		if f.Kind == FaultLowSOC {
			z0 = lowSOCStart
		}
	}
	m := &Model{AmbientC: amb, Cells: make([]Cell, n)}
	r0 := r0OhmAh / q
	for k := range m.Cells {
		c := &m.Cells[k]
		c.CapacityAh = q * (1 + capSpread*(2*rng.Float64()-1))
		c.R0 = r0 * (1 + r0Spread*(2*rng.Float64()-1))
		c.R1 = r1OfR0 * r0
		c.C1 = tau1 / c.R1
		c.Eta = chargeEta
		c.OCV = ocv
		c.SetSOC(z0)
	}
	for _, cs := range sc.Cells {
		if cs.N > n {
			return nil, fmt.Errorf("scenario %s: [[cell]] n = %d but the pack has %d cells", sc.Name, cs.N, n)
		}
		c := &m.Cells[cs.N-1]
		f := 1.0
		if cs.CapacityFactor > 0 {
			f = cs.CapacityFactor
			c.CapacityAh *= f
		}
		if cs.R0Factor > 0 {
			c.R0 *= cs.R0Factor
		}
		// balanced at the top: as much room to full as the others
		c.SetSOC(1 - (1-z0)/f + cs.SOCOffsetPct/100)
	}
	for _, f := range faults {
		if f.Kind != FaultWeakCell {
			continue
		}
		if f.N > n {
			return nil, fmt.Errorf("fault %s: the pack has %d cells", f, n)
		}
		c := &m.Cells[f.N-1]
		c.CapacityAh *= weakCapacity
		c.R0 *= weakR0
		// balanced at the top: it holds as much room to full as the others,
		// so less charge at any lower state.
		c.SetSOC(1 - (1-z0)/weakCapacity)
	}

	ns := p.Pack.Sensors
	roles := make(map[int]string)
	for _, s := range p.Sensors {
		roles[s.N] = s.Role
	}
	mass := q * kgPerAh
	ha := hWPerM2K * areaM2At180 * math.Pow(q/180, 2.0/3)
	m.Sensors = make([]SensorNode, ns)
	for k := range m.Sensors {
		s := &m.Sensors[k]
		lo, hi := k*n/ns, (k+1)*n/ns
		if hi <= lo {
			hi = lo + 1
		}
		switch roles[k+1] {
		case "ambient", "coolant":
			// follows the air or coolant: a small, well-cooled node with no cells
			s.HeatCap, s.HA = 50, 5
		default:
			for c := lo; c < hi && c < n; c++ {
				s.Cells = append(s.Cells, c)
			}
			s.HeatCap = float64(len(s.Cells)) * mass * cpJPerKgK
			s.HA = float64(len(s.Cells)) * ha
		}
		if roles[k+1] == "busbar" {
			s.ExtraOhm = 0.5 * r0 // a link between cells
		}
		s.T = amb
	}
	for _, ss := range sc.Sensors {
		if ss.N > ns {
			return nil, fmt.Errorf("scenario %s: [[sensor]] n = %d but the pack has %d sensors", sc.Name, ss.N, ns)
		}
		s := &m.Sensors[ss.N-1]
		if ss.BusbarMilliohm > 0 {
			s.ExtraOhm = ss.BusbarMilliohm / 1000
		}
		if ss.HeatCapacityFactor > 0 {
			s.HeatCap *= ss.HeatCapacityFactor
		}
		s.HeatW += ss.HeatW
		if ss.StartC != nil {
			s.T = *ss.StartC
		}
	}
	return m, nil
}

// hotTarget is where a hot-sensor fault takes the sensor, °C.
func hotTarget(p *config.Profile) float64 {
	if p.Limits.TempHighC != nil {
		return *p.Limits.TempHighC + hotSensorUpC
	}
	return 60
}

// heatSensor makes sensor node s run hot: enough fixed heat to hold target in
// steady state, and a short time constant (two minutes) to get there.
func heatSensor(m *Model, k int, target float64, now bool) {
	s := &m.Sensors[k]
	s.HeatCap = 120 * s.HA
	s.lastDt = 0 // the cached decay no longer holds
	s.HeatW = s.HA * (target - m.AmbientC)
	if now {
		s.T = target
	}
}
