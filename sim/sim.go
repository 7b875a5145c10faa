package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sync"
	"time"

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
	case math.IsNaN(opt.Speed):
		return nil, fmt.Errorf("speed is not a number")
	case opt.Speed < 0, math.IsInf(opt.Speed, 1):
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
