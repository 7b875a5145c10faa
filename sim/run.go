package sim

import (
	"context"
	"fmt"
	"math"
	"time"

	"packwatch/bus"
)

// Run simulates and delivers batches to sink until ctx ends (returning nil)
// or Options.For of simulated time has passed (returning nil). Batches are
// paced in wall time by the speed; data time is simulated time. Run is
// called from the caller's goroutine and starts none of its own; it must
// not run twice at once.
func (s *Sim) Run(ctx context.Context, sink bus.Sink) error {
	s.mu.Lock()
	if s.running {
		s.mu.Unlock()
		return fmt.Errorf("sim: Run is already running")
	}
	s.running = true
	s.mu.Unlock()
	defer func() {
		s.mu.Lock()
		s.running = false
		s.mu.Unlock()
	}()

	p := s.dm.Profile()
	for k := range p.Sources {
		t := s.start + s.now()
		sink.Status(bus.Status{Src: uint16(k), T: t, State: bus.StateConnecting, Reason: "starting the simulator"})
		sink.Status(bus.Status{Src: uint16(k), T: t, State: bus.StateConnected, Reason: "simulated (" + s.sc.Name + ")"})
	}
	defer func() {
		t := s.start + s.now()
		for k := range p.Sources {
			sink.Status(bus.Status{Src: uint16(k), T: t, State: bus.StateStopped, Reason: "simulation ended"})
		}
	}()

	end := int64(math.MaxInt64)
	if s.opt.For > 0 {
		end = int64(s.opt.For)
	}
	now, ticks := s.opt.Now, s.opt.Ticks
	if now == nil {
		now = time.Now
	}
	if ticks == nil && !math.IsInf(s.speed, 1) {
		tk := time.NewTicker(20 * time.Millisecond)
		defer tk.Stop()
		ticks = tk.C
	}
	wallAnchor, simAnchor := now(), s.now()
	s.mu.Lock()
	seenPauses := s.pauses
	s.mu.Unlock()
	wasPaused := false
	for {
		s.mu.Lock()
		paused, through, pauses := s.paused, s.through, s.pauses
		s.mu.Unlock()
		if through >= end {
			return nil
		}
		if paused {
			wasPaused = true
			select {
			case <-ctx.Done():
				return nil
			case a := <-s.adv:
				s.runAdvance(a, sink, end)
			case <-s.wake:
			}
			continue
		}
		if wasPaused || pauses != seenPauses {
			// paused since the anchor (however briefly): the wall time
			// until now does not count
			wasPaused, seenPauses = false, pauses
			wallAnchor, simAnchor = now(), through
		}
		if math.IsInf(s.speed, 1) { // as fast as it can
			select {
			case <-ctx.Done():
				return nil
			case a := <-s.adv:
				s.runAdvance(a, sink, end)
				continue
			default:
			}
			s.mu.Lock()
			for len(s.buf) < batchMax && s.through < end {
				s.generate(min(end, s.through+int64(time.Second)))
			}
			s.mu.Unlock()
			s.flush(sink)
			continue
		}
		select {
		case <-ctx.Done():
			return nil
		case a := <-s.adv:
			s.runAdvance(a, sink, end)
			simAnchor += a.d
			continue
		case <-s.wake:
			continue
		case <-ticks:
		}
		s.mu.Lock()
		if s.paused || s.pauses != seenPauses {
			// paused (and perhaps resumed) while waiting: the loop's top
			// re-anchors first, so that the paused time does not count
			s.mu.Unlock()
			continue
		}
		target := simAnchor + int64(float64(now().Sub(wallAnchor))*s.speed)
		s.generate(min(target, end))
		s.mu.Unlock()
		s.flush(sink)
	}
}

func (s *Sim) now() int64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.through
}

// runAdvance serves one Advance request.
func (s *Sim) runAdvance(a advance, sink bus.Sink, end int64) {
	s.mu.Lock()
	s.generate(min(s.through+a.d, end))
	s.mu.Unlock()
	s.flush(sink)
	close(a.done)
}

// flush delivers s.buf in batches of at most batchMax and empties it. The
// buffer belongs to Run's goroutine: generate and flush both run there.
func (s *Sim) flush(sink bus.Sink) {
	for i := 0; i < len(s.buf); i += batchMax {
		sink.Deliver(s.buf[i:min(len(s.buf), i+batchMax)])
	}
	s.buf = s.buf[:0]
}
