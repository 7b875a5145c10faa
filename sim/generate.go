package sim

import (
	"math"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
)

// applyFaults activates faults whose time has come and updates drifting
// ones. Called with mu held.
func (s *Sim) applyFaults() {
	p := s.dm.Profile()
	for k, f := range s.faults {
		after := int64(f.After)
		if s.t < after {
			continue
		}
		if f.Kind == FaultCellHigh {
			n := max(f.N, 1)
			s.fs.cellOffset[n] = math.Min(cellDriftMaxV, cellDriftVPerS*float64(s.t-after)/1e9)
			s.dirty = true
		}
		if s.active[k] {
			continue
		}
		s.active[k] = true
		s.dirty = true
		switch f.Kind {
		case FaultSensorStop:
			s.fs.sensorStop[max(f.N, 1)] = true
		case FaultHotSensor:
			n := f.N
			if n == 0 {
				n = 1
				for _, sn := range p.Sensors {
					if sn.Role == "busbar" {
						n = sn.N
						break
					}
				}
			}
			if n >= 1 && n <= len(s.model.Sensors) {
				heatSensor(s.model, n-1, hotTarget(p), f.After == 0)
			}
		case FaultSilent:
			src := 0
			for i, sp := range p.Sources {
				if sp.Name == f.Source {
					src = i
				}
			}
			s.silent[uint16(src)] = true
		case FaultContactorStuck:
			s.fs.stuck = true
		case FaultGarbage:
			s.garbage = true
			s.garbageT = s.t
		case FaultFlag:
			s.fs.flag = true
		}
	}
}

// tick advances the physics by one step. Called with mu held.
func (s *Sim) tick() {
	s.story.tick(float64(s.step) / 1e9)
	s.t += s.step
	s.dirty = true
	if len(s.faults) > 0 {
		s.applyFaults()
	}
}

// generate simulates up to until (ns from the start) and appends every
// message due on the way to s.buf. Called with mu held.
func (s *Sim) generate(until int64) {
	for {
		due := s.enc.NextDue()
		if due > until {
			break
		}
		for s.t+s.step <= due {
			s.tick()
		}
		s.garbageUpTo(due)
		if s.dirty {
			s.rep.begin(s.model, s.story.phase, s.story.cv, &s.fs, s.forced, s.chgV)
			s.dirty = false
		}
		n := len(s.buf)
		s.buf = s.enc.next(s.buf, due, s.start, s.rep, &s.encErrs)
		if len(s.silent) > 0 {
			kept := s.buf[:n]
			for _, msg := range s.buf[n:] {
				if !s.silent[msg.Src] {
					kept = append(kept, msg)
				}
			}
			s.buf = kept
		}
	}
	for s.t+s.step <= until {
		s.tick()
	}
	s.through = max(s.through, until)
	s.garbageUpTo(until)
}

// garbageUpTo adds the garbage of a garbage fault, once a second of
// simulated time, up to t (ns from the start). Called with mu held.
func (s *Sim) garbageUpTo(t int64) {
	if !s.garbage {
		return
	}
	for s.garbageT+int64(time.Second) <= t {
		s.garbageT += int64(time.Second)
		s.appendGarbage(s.garbageT)
	}
}

// appendGarbage adds malformed data on every source at data time t (ns
// from the start): on CAN sources a frame with an ID the profile does not
// know and a frame too short for the fields of a known one; on every source
// a line of junk characters (on a CAN source, bytes that are no frame).
func (s *Sim) appendGarbage(t int64) {
	p := s.dm.Profile()
	for k := range p.Sources {
		src := uint16(k)
		if s.silent[src] {
			continue
		}
		if s.hasCAN[src] {
			var d [8]byte
			for i := range d {
				d[i] = byte(s.rng.UintN(256))
			}
			s.buf = append(s.buf, bus.Message{T: s.start + t, Src: src, Kind: bus.KindCAN,
				Frame: can.Frame{ID: s.unknown[src], Length: uint8(s.rng.UintN(9)), Data: d}})
			for _, f := range s.dm.Fields() {
				if f.Src == k {
					s.buf = append(s.buf, bus.Message{T: s.start + t, Src: src, Kind: bus.KindCAN,
						Frame: can.Frame{ID: f.ID, IsExtended: f.Extended, Length: 0}})
					break
				}
			}
		}
		// bytes that are no frame and no line of the profile: a serial-line
		// target writes them as they are
		junk := make([]byte, 8+s.rng.IntN(24))
		for i := range junk {
			junk[i] = byte(0x21 + s.rng.IntN(94))
		}
		s.buf = append(s.buf, bus.Message{T: s.start + t, Src: src, Kind: bus.KindLine, Text: string(junk)})
	}
}
