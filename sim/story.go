package sim

// Phase is what the story is doing now, as a BMS would report it.
type Phase uint8

// Phases.
const (
	PhaseIdle Phase = iota
	PhaseCharging
	PhaseDischarging
)

// String names the phase as the example profile's bms.state enum does.
func (p Phase) String() string {
	switch p {
	case PhaseCharging:
		return "charging"
	case PhaseDischarging:
		return "discharging"
	}
	return "idle"
}

// story runs a scenario's steps on a model, one tick at a time.
type story struct {
	sc    *Scenario
	m     *Model
	step  int     // index into sc.Steps
	stepT float64 // seconds into the current step
	cv    bool    // the charge has reached its constant-voltage phase
	// passes counts completed runs through all steps.
	passes int
	// holding: End = "hold" and the steps are done; the pack rests.
	holding bool
	phase   Phase
	// requested is the current the step asked for in the latest tick (before
	// the model's physical limits), A.
	requested float64
}

func newStory(sc *Scenario, m *Model) *story {
	s := &story{sc: sc, m: m}
	s.enter()
	return s
}

// enter sets the contactor and phase for the current step.
func (s *story) enter() {
	s.stepT = 0
	s.cv = false
	if s.holding {
		s.m.Contactor = false
		s.phase = PhaseIdle
		return
	}
	switch s.sc.Steps[s.step].Kind {
	case "charge":
		s.m.Contactor = true
		s.phase = PhaseCharging
	case "discharge":
		s.m.Contactor = true
		s.phase = PhaseDischarging
	default:
		s.m.Contactor = false
		s.phase = PhaseIdle
	}
}

// next moves to the following step, looping or holding at the end.
func (s *story) next() {
	s.step++
	if s.step >= len(s.sc.Steps) {
		s.passes++
		s.step = 0
		if s.sc.End == "hold" {
			s.holding = true
		}
	}
	s.enter()
}

// tick advances the story and the model by dt seconds.
func (s *story) tick(dt float64) {
	if s.holding {
		s.requested = 0
		s.m.Step(0, dt)
		return
	}
	st := &s.sc.Steps[s.step]
	var i float64
	switch st.Kind {
	case "charge":
		i = st.CurrentA
		if cv := s.m.CVCurrent(float64(len(s.m.Cells))*st.CellV, dt); cv < i {
			i = max(cv, 0)
			s.cv = true
		}
	case "discharge":
		i = -st.CurrentA
		if st.BurstA > 0 {
			every, dur := st.BurstEvery.Seconds(), st.BurstFor.Seconds()
			if s.stepT >= every {
				if ph := s.stepT - every*float64(int(s.stepT/every)); ph < dur {
					i -= st.BurstA
				}
			}
		}
	}
	s.requested = i
	got := s.m.Step(i, dt)
	s.stepT += dt

	done := st.For > 0 && s.stepT >= st.For.Seconds()-1e-9
	switch st.Kind {
	case "charge":
		if s.cv && got <= st.CutoffA {
			done = true
		}
		if got < i-1e-9 { // a cell is full: nothing more goes in
			done = true
		}
	case "discharge":
		lo, _ := s.m.CellVoltageRange(got)
		if st.UntilCellV > 0 && lo <= st.UntilCellV {
			done = true
		}
		if st.UntilSOCPct > 0 && 100*s.m.MeanSOC() <= st.UntilSOCPct {
			done = true
		}
		if got > i+1e-9 { // a cell is empty
			done = true
		}
	}
	if done {
		s.next()
	}
}
