package analyze

import "math"

// Session is a recorded session as traces on data time, the input of every
// analysis. Build it with a Collector, or fill the traces directly (tests,
// synthetic data).
type Session struct {
	// Start is the data time of t = 0, ns since the Unix epoch.
	Start int64
	// Pack describes the pack as its profile does.
	Pack PackInfo
	// Current is pack.current, A, positive = charging.
	Current Trace
	// PackV is pack.voltage, V; when the profile does not bind it, Finish
	// fills it with the sum of the cells at each current reading.
	PackV Trace
	// PackVDerived is true when PackV is the sum of cells.
	PackVDerived bool
	// Cells[k] is cell k+1's voltage, V.
	Cells []Trace
	// Temps[k] is temperature sensor k+1, °C.
	Temps []Trace
	// SOC is pack.soc as the BMS reports it, %.
	SOC Trace
	// Link is link.voltage (the load side of the main contactor), V.
	Link Trace
	// Main, MainCommand and Precharge are the contactor flags (1 closed),
	// kept only when they change: each reading is a transition.
	Main, MainCommand, Precharge Trace
	// Gaps are the data times (s) of breaks in the data: nothing is
	// integrated across them.
	Gaps []float64
	// Messages counts the messages read; Malformed those skipped.
	Messages, Malformed int
}

// PackInfo is what the analysis needs from the profile's [pack].
type PackInfo struct {
	Name       string  `json:"name"`
	Cells      int     `json:"cells"`
	Sensors    int     `json:"temp_sensors"`
	CapacityAh float64 `json:"capacity_ah"` // rated capacity, for C-rates and SOC
	Chemistry  string  `json:"chemistry"`
	// SensorRoles[k] is sensor k+1's role (cell, busbar, ambient, coolant;
	// "" when the profile does not say).
	SensorRoles []string `json:"sensor_roles"`
}

// Duration is the time from the first to the last current reading, s.
func (s *Session) Duration() float64 {
	if s.Current.Empty() {
		return 0
	}
	return s.Current.T[len(s.Current.T)-1] - s.Current.T[0]
}

// Finish sorts every trace and derives the pack voltage from the cells when
// the profile does not bind it. Call it once after the last reading.
func (s *Session) Finish() {
	for _, tr := range s.traces() {
		tr.Sort()
	}
	if s.PackV.Empty() && len(s.Cells) > 0 {
		s.derivePackV()
	}
}

func (s *Session) traces() []*Trace {
	out := []*Trace{&s.Current, &s.PackV, &s.SOC, &s.Link, &s.Main, &s.MainCommand, &s.Precharge}
	for k := range s.Cells {
		out = append(out, &s.Cells[k])
	}
	for k := range s.Temps {
		out = append(out, &s.Temps[k])
	}
	return out
}

// derivePackV sums the cells at every current reading once every cell has
// reported.
func (s *Session) derivePackV() {
	first := 0.0
	for k := range s.Cells {
		if s.Cells[k].Empty() {
			return
		}
		first = math.Max(first, s.Cells[k].T[0])
	}
	cs := make([]cursor, len(s.Cells))
	for k := range cs {
		cs[k].tr = &s.Cells[k]
	}
	times := s.Current.T
	if len(times) == 0 {
		times = s.Cells[0].T
	}
	for _, t := range times {
		if t < first {
			continue
		}
		var sum float64
		for k := range cs {
			v, _ := cs[k].at(t)
			sum += v
		}
		s.PackV.Add(t, sum)
	}
	s.PackVDerived = true
}

// gapBetween reports whether a gap lies in (a, b].
func (s *Session) gapBetween(a, b float64) bool {
	for _, g := range s.Gaps {
		if g > a && g <= b {
			return true
		}
	}
	return false
}

// meanTemp is the mean of the temperature sensors over [a, b], NaN when
// none reported; cell sensors only when the profile marks roles and has any.
func (s *Session) meanTemp(a, b float64) float64 {
	var sum float64
	var n int
	for k := range s.Temps {
		if k < len(s.Pack.SensorRoles) && s.Pack.SensorRoles[k] != "" && s.Pack.SensorRoles[k] != "cell" {
			continue
		}
		tr := &s.Temps[k]
		i, j := tr.Window(a, b+1e-9)
		if i == j {
			if v, ok := tr.At((a + b) / 2); ok {
				sum += v
				n++
			}
			continue
		}
		for _, v := range tr.V[i:j] {
			sum += v
			n++
		}
	}
	if n == 0 {
		return math.NaN()
	}
	return sum / float64(n)
}

// tempsAt gives each sensor's value at t (NaN for a sensor with no reading).
func (s *Session) tempsAt(t float64) []float64 {
	out := make([]float64, len(s.Temps))
	for k := range s.Temps {
		v, ok := s.Temps[k].At(t)
		if !ok {
			v = math.NaN()
		}
		out[k] = v
	}
	return out
}
