package sim

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
	"packwatch/decode"
)

// SpeedMax as Options.Speed runs the simulation as fast as it can.
const SpeedMax = -1

// Options configure a Sim. The zero value runs the profile's generic story
// at the default speed, starting now.
type Options struct {
	// Speed is simulated seconds per wall second. 0 picks the default: the
	// scenario's first pass shows in about ten minutes (see StoryLength).
	// SpeedMax (any negative value) runs as fast as it can.
	Speed float64
	// Scenario is the story; nil means GenericScenario of the profile.
	Scenario *Scenario
	// Faults are put into the data on request.
	Faults []Fault
	// Start is the data time of the simulation's start; zero means the wall
	// clock when New is called.
	Start time.Time
	// Seed makes the cells' manufacturing spread and garbage bytes
	// repeatable; the same seed gives the same data.
	Seed uint64
	// Step is the physics time step in simulated time (default 100 ms).
	Step time.Duration
	// For ends Run (returning nil) after this much simulated time; 0 runs
	// until the context ends.
	For time.Duration
	// Now and Ticks are the wall clock that paces Run; nil: time.Now and a
	// 20 ms ticker. A test sets both and drives Ticks itself.
	Now   func() time.Time
	Ticks <-chan time.Time
}

// defaultShowTime is how long the default speed takes to show a story.
const defaultShowTime = 10 * time.Minute

// batchMax is the largest batch Run delivers at once.
const batchMax = 4096

// Sim is a simulated pack speaking through a compiled profile. Run drives
// it; the other methods are safe to call from any goroutine while it runs.
type Sim struct {
	dm   *decode.Map
	opt  Options
	sc   *Scenario
	enc  *Encoder
	rep  *reporter
	step int64 // ns

	mu       sync.Mutex
	model    *Model
	story    *story
	t        int64 // simulated ns since the start (physics time)
	through  int64 // messages are generated up to here, ns since the start
	start    int64 // data time of the start, ns since the epoch
	speed    float64
	storyLen time.Duration
	lenOnce  sync.Once
	faults   []Fault
	active   []bool
	fs       faultState
	forced   map[int]float64
	dirty    bool
	chgV     float64
	silent   map[uint16]bool
	garbage  bool
	garbageT int64
	rng      *rand.Rand
	encErrs  int
	paused   bool
	pauses   uint64            // Pause calls, so that Run notices even a short pause
	unknown  map[uint16]uint32 // per CAN source, an ID the profile does not know
	hasCAN   map[uint16]bool

	wake chan struct{}
	adv  chan advance
	buf  []bus.Message
	// running guards against two Runs at once.
	running bool
}

type advance struct {
	d    int64
	done chan struct{}
}

// New builds a simulator for a compiled profile.
func New(m *decode.Map, opt Options) (*Sim, error) {
	p := m.Profile()
	sc := opt.Scenario
	if sc == nil {
		sc = GenericScenario(p)
	}
	if err := sc.Validate(); err != nil {
		return nil, fmt.Errorf("scenario %s: %w", sc.Name, err)
	}
	model, err := buildModel(p, sc, opt.Faults, opt.Seed)
	if err != nil {
		return nil, err
	}
	enc, err := NewEncoder(m)
	if err != nil {
		return nil, err
	}
	s := &Sim{dm: m, opt: opt, sc: sc, enc: enc, rep: newReporter(m), model: model,
		forced: map[int]float64{}, silent: map[uint16]bool{}, faults: opt.Faults,
		active: make([]bool, len(opt.Faults)), dirty: true,
		rng:  rand.New(rand.NewPCG(opt.Seed, 0x5eed)),
		wake: make(chan struct{}, 1), adv: make(chan advance),
		unknown: map[uint16]uint32{}, hasCAN: map[uint16]bool{},
	}
	s.fs = faultState{cellOffset: map[int]float64{}, sensorStop: map[int]bool{}}
	s.step = int64(opt.Step)
	if s.step <= 0 {
		s.step = int64(100 * time.Millisecond)
	}
	for _, f := range opt.Faults {
		switch f.Kind {
		case FaultCellHigh, FaultWeakCell:
			if f.N > p.Pack.Cells {
				return nil, fmt.Errorf("fault %s: the pack has %d cells", f, p.Pack.Cells)
			}
		case FaultSensorStop, FaultHotSensor:
			if f.N > p.Pack.Sensors || p.Pack.Sensors == 0 {
				return nil, fmt.Errorf("fault %s: the pack has %d temperature sensors", f, p.Pack.Sensors)
			}
		case FaultSilent:
			if f.Source != "" {
				found := false
				for _, src := range p.Sources {
					found = found || src.Name == f.Source
				}
				if !found {
					return nil, fmt.Errorf("fault %s: the profile has no source %q", f, f.Source)
				}
			}
		}
	}
	for k := range p.Sources {
		switch p.Sources[k].Kind {
		case "serial-text":
		default:
			s.hasCAN[uint16(k)] = true
			s.unknown[uint16(k)] = 0x7FF
			for id := uint32(0x7FF); id > 0; id-- {
				if !m.Known(k, id, false) {
					s.unknown[uint16(k)] = id
					break
				}
			}
		}
	}
	s.start = opt.Start.UnixNano()
	if opt.Start.IsZero() {
		s.start = time.Now().UnixNano()
	}
	for _, st := range sc.Steps {
		if st.Kind == "charge" {
			s.chgV = float64(len(model.Cells)) * st.CellV
			break
		}
	}
	s.story = newStory(sc, model)
	switch {
	case opt.Speed < 0:
		s.speed = math.Inf(1)
	case opt.Speed == 0:
		s.speed = math.Max(1, s.StoryLength().Seconds()/defaultShowTime.Seconds())
	default:
		s.speed = opt.Speed
	}
	s.applyFaults() // those that act from the start
	return s, nil
}

// maxStory bounds the dry run that measures a story.
const maxStory = 7 * 24 * time.Hour

// StoryLength is the simulated time of one pass through the scenario
// (bounded by a week, and by the first pass when the scenario holds),
// measured once by a dry run of a copy of the model at 1 s steps.
func (s *Sim) StoryLength() time.Duration {
	s.lenOnce.Do(func() {
		m, err := buildModel(s.dm.Profile(), s.sc, s.opt.Faults, s.opt.Seed)
		if err != nil { // New built the same model without error
			return
		}
		st := newStory(s.sc, m)
		var t float64
		for st.passes == 0 && t < maxStory.Seconds() {
			st.tick(1)
			t++
		}
		s.storyLen = time.Duration(t * float64(time.Second))
	})
	return s.storyLen
}

// Speed is the speed in use: simulated seconds per wall second (+Inf for
// SpeedMax).
func (s *Sim) Speed() float64 { return s.speed }

// Warnings lists the parts of the profile the simulator cannot write (see
// Encoder.Warnings).
func (s *Sim) Warnings() []string { return s.enc.Warnings() }

// Scenario is the scenario in use.
func (s *Sim) Scenario() *Scenario { return s.sc }

// Start is the data time of the simulation's start.
func (s *Sim) Start() time.Time { return time.Unix(0, s.start).UTC() }

// EncodeErrors counts console lines the encoder could not write for a value
// (the pattern's group does not accept it).
func (s *Sim) EncodeErrors() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.encErrs
}

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
		target := simAnchor + int64(float64(now().Sub(wallAnchor))*s.speed)
		s.mu.Lock()
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
