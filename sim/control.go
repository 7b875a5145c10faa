package sim

import (
	"context"
	"fmt"
	"math"
	"time"
)

// Pause stops simulated time: Run delivers nothing until Resume (or
// Advance). Data time does not move while paused.
func (s *Sim) Pause() {
	s.mu.Lock()
	s.paused = true
	s.pauses++
	s.mu.Unlock()
	s.poke()
}

// Resume lets simulated time run again from where it stopped.
func (s *Sim) Resume() {
	s.mu.Lock()
	s.paused = false
	s.mu.Unlock()
	s.poke()
}

func (s *Sim) poke() {
	select {
	case s.wake <- struct{}{}:
	default:
	}
}

// Advance makes Run simulate and deliver d of simulated time at once, paused
// or not, and returns when the batches are delivered. It needs Run to be
// running; it returns ctx.Err() if ctx ends first.
func (s *Sim) Advance(ctx context.Context, d time.Duration) error {
	a := advance{d: int64(d), done: make(chan struct{})}
	select {
	case s.adv <- a:
	case <-ctx.Done():
		return ctx.Err()
	}
	select {
	case <-a.done:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

// ForceCell makes cell n (from 1) report volts from now on, whatever the
// model says, in every frame and line that carries it; NaN lets the model
// speak again. Tests use it to push a cell past a limit.
func (s *Sim) ForceCell(n int, volts float64) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if n < 1 || n > len(s.model.Cells) {
		return fmt.Errorf("force cell %d: the pack has cells 1 to %d", n, len(s.model.Cells))
	}
	if math.IsNaN(volts) {
		delete(s.forced, n)
	} else {
		s.forced[n] = volts
	}
	s.dirty = true
	return nil
}

// State is the simulated pack's true state at one instant.
type State struct {
	// T is the data time up to which messages have been generated, and
	// Elapsed the same from the start; the physics stands at most one step
	// behind.
	T         time.Time
	Elapsed   time.Duration
	Phase     Phase
	Step      int // index of the scenario step running
	Pass      int // completed passes through the scenario
	CurrentA  float64
	PackV     float64
	Contactor bool
	CellV     []float64
	SOC       []float64 // 0..1
	TempC     []float64
	ChargeAh  float64 // ∫I dt since the start, A·h (positive charging)
	Paused    bool
}

// State returns the model's state now.
func (s *Sim) State() State {
	s.mu.Lock()
	defer s.mu.Unlock()
	m := s.model
	st := State{T: time.Unix(0, s.start+s.through).UTC(), Elapsed: time.Duration(s.through), Phase: s.story.phase,
		Step: s.story.step, Pass: s.story.passes, CurrentA: m.I, PackV: m.PackVoltage(m.I),
		Contactor: m.Contactor, ChargeAh: m.ChargeAs / 3600, Paused: s.paused}
	for k := range m.Cells {
		st.CellV = append(st.CellV, m.Cells[k].Voltage(m.I))
		st.SOC = append(st.SOC, m.Cells[k].SOC())
	}
	for k := range m.Sensors {
		st.TempC = append(st.TempC, m.Sensors[k].T)
	}
	return st
}
