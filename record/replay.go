package record

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sync"
	"time"

	"packwatch/bus"
)

// ReplayOptions configures a Replay. The zero value of each field means its default.
type ReplayOptions struct {
	// Speed is the factor of real time (1 = as recorded, 30 = thirty times
	// faster); 0 means as fast as possible, without pacing.
	Speed float64
	// Paused starts the replay paused: nothing is delivered until Play.
	Paused bool
	// Hold keeps Run waiting at the end of the recording for a Seek (a page
	// that can seek back) instead of returning.
	Hold bool
	// OnSeek is called from Run's goroutine when a seek to data time t
	// starts, before the fast-forward from the start of the recording: the
	// owner resets its state there (the engine, charts, counters).
	OnSeek func(t int64)
	// Clock paces the replay, default the real clock.
	Clock Clock
	// Granularity is the shortest wait between two deliveries, default
	// 5 ms: messages due within it are delivered together.
	Granularity time.Duration
}

// Replay delivers a recording to a bus.Sink like a live source, paced on the
// recording's data time. Run does the work in the caller's goroutine; the
// control methods (Pause, Play, Seek, SetSpeed) may be called from any
// goroutine and satisfy the server's replay control.
type Replay struct {
	r     *Reader
	opt   ReplayOptions
	clock Clock

	mu         sync.Mutex
	speed      float64
	paused     bool
	wallAnchor time.Time // the data clock reads dataAnchor at wallAnchor
	dataAnchor int64
	pos        int64 // data time of the last delivered message (or seek target)
	seekGen    uint64
	seekTo     int64
	spanOK     bool
	first      int64
	last       int64
	wake       chan struct{}

	onWait func(paused bool, d time.Duration) // test hook: Run is about to block, its timer set
}

// errSeek aborts a scan when a seek arrives.
var errSeek = errors.New("seek")

// NewReplay prepares a replay of r; nothing happens until Run.
func NewReplay(r *Reader, opt ReplayOptions) *Replay {
	if opt.Clock == nil {
		opt.Clock = wallClock{}
	}
	if opt.Granularity <= 0 {
		opt.Granularity = 5 * time.Millisecond
	}
	if opt.Speed < 0 || math.IsNaN(opt.Speed) || math.IsInf(opt.Speed, 0) {
		opt.Speed = 0
	}
	p := &Replay{r: r, opt: opt, clock: opt.Clock, speed: opt.Speed, paused: opt.Paused,
		wake: make(chan struct{}, 1), seekTo: math.MinInt64}
	return p
}

// dataNowLocked is the replay's data clock at wall time now.
func (p *Replay) dataNowLocked(now time.Time) int64 {
	if p.paused || p.speed == 0 {
		return p.dataAnchor
	}
	d := float64(now.Sub(p.wallAnchor)) * p.speed
	if d > math.MaxInt64/2 {
		d = math.MaxInt64 / 2
	}
	return p.dataAnchor + int64(d)
}

// reanchorLocked restarts the data clock from its current reading.
func (p *Replay) reanchorLocked() {
	now := p.clock.Now()
	if p.speed == 0 {
		p.dataAnchor = p.pos
	} else {
		p.dataAnchor = p.dataNowLocked(now)
	}
	p.wallAnchor = now
}

func (p *Replay) signal() {
	select {
	case p.wake <- struct{}{}:
	default:
	}
}

// Pause stops delivering; the data clock stands still until Play.
func (p *Replay) Pause() error {
	p.mu.Lock()
	if !p.paused {
		p.reanchorLocked()
		p.paused = true
	}
	p.mu.Unlock()
	p.signal()
	return nil
}

// Play resumes after Pause.
func (p *Replay) Play() error {
	p.mu.Lock()
	if p.paused {
		p.paused = false
		p.wallAnchor = p.clock.Now()
		if p.speed == 0 {
			p.dataAnchor = p.pos
		}
	}
	p.mu.Unlock()
	p.signal()
	return nil
}

// SetSpeed changes the factor of real time; 0 means as fast as possible.
func (p *Replay) SetSpeed(factor float64) error {
	if factor < 0 || math.IsNaN(factor) || math.IsInf(factor, 0) {
		return fmt.Errorf("replay speed %v: must be a finite number ≥ 0", factor)
	}
	p.mu.Lock()
	p.reanchorLocked()
	p.speed = factor
	p.mu.Unlock()
	p.signal()
	return nil
}

// Seek moves to offset from the start of the recording (see SeekTo).
func (p *Replay) Seek(offset time.Duration) error {
	if offset < 0 {
		return fmt.Errorf("replay seek %v: before the start", offset)
	}
	first, _, _, err := p.span()
	if err != nil {
		return err
	}
	return p.SeekTo(first + int64(offset))
}

// SeekTo moves to data time t (ns): Run calls OnSeek(t), delivers the
// recording from its start up to t without pacing, then continues from t
// (paused if it was). Seeking past the end goes to the end.
func (p *Replay) SeekTo(t int64) error {
	_, last, ok, err := p.span()
	if err != nil {
		return err
	}
	if ok && t > last+1 {
		t = last + 1
	}
	p.mu.Lock()
	p.seekGen++
	p.seekTo = t
	p.pos = t
	p.dataAnchor = t
	p.wallAnchor = p.clock.Now()
	p.mu.Unlock()
	p.signal()
	return nil
}

// Position is the replay's data time (ns): the data clock while playing
// paced, the last message delivered at full speed.
func (p *Replay) Position() int64 {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.speed == 0 || p.wallAnchor.IsZero() { // full speed, or not started
		return p.pos
	}
	t := p.dataNowLocked(p.clock.Now())
	if p.spanOK && t > p.last {
		t = max(p.last, p.pos)
	}
	return t
}

// Speed returns the current factor of real time (0 = as fast as possible).
func (p *Replay) Speed() float64 {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.speed
}

// Paused reports whether the replay is paused.
func (p *Replay) Paused() bool {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.paused
}

func (p *Replay) span() (first, last int64, ok bool, err error) {
	p.mu.Lock()
	if p.spanOK {
		defer p.mu.Unlock()
		return p.first, p.last, true, nil
	}
	p.mu.Unlock()
	first, last, ok, err = p.r.Span()
	if err != nil || !ok {
		return first, last, ok, err
	}
	p.mu.Lock()
	p.first, p.last, p.spanOK = first, last, true
	p.mu.Unlock()
	return first, last, true, nil
}

// Run delivers the recording to sink until its end (or, with Hold, until ctx
// ends). It returns nil at the end and on cancel, like every bus source, and
// an error only when the recording cannot be read. Each recorded source
// reports connecting and connected at the start and stopped once at the end.
// It starts no goroutine.
func (p *Replay) Run(ctx context.Context, sink bus.Sink) error {
	err := p.run(ctx, sink)
	if ctx.Err() != nil {
		return nil
	}
	return err
}

func (p *Replay) run(ctx context.Context, sink bus.Sink) error {
	first, _, ok, err := p.span()
	if err != nil {
		return err
	}
	srcs := p.r.Meta().Sources
	for _, st := range []bus.State{bus.StateConnecting, bus.StateConnected} {
		for _, s := range srcs {
			sink.Status(bus.Status{Src: s.Index, T: first, State: st, Reason: "replay of " + p.r.Path()})
		}
	}
	defer func() {
		t := max(p.Position(), first)
		for _, s := range srcs {
			sink.Status(bus.Status{Src: s.Index, T: t, State: bus.StateStopped, Reason: "end of replay"})
		}
	}()
	if !ok {
		return nil // an empty recording
	}
	p.mu.Lock()
	gen := p.seekGen
	from := first
	if p.seekTo != math.MinInt64 { // seeked before Run
		gen--
	} else {
		p.pos, p.dataAnchor, p.wallAnchor = first, first, p.clock.Now()
	}
	p.mu.Unlock()
	for {
		p.mu.Lock()
		seeking := gen != p.seekGen
		gen = p.seekGen
		to := p.seekTo
		p.mu.Unlock()
		if seeking {
			if p.opt.OnSeek != nil {
				p.opt.OnSeek(to)
			}
			err := p.r.Scan(ctx, first, to, func(b []bus.Message) error {
				if p.seekChanged(gen) {
					return errSeek
				}
				sink.Deliver(b)
				return ctx.Err()
			})
			if errors.Is(err, errSeek) {
				continue
			}
			if err != nil {
				return err
			}
			from = to
			p.mu.Lock()
			if p.seekGen == gen && p.speed != 0 && !p.paused {
				p.wallAnchor = p.clock.Now() // the fast-forward took time: start from t now
				p.dataAnchor = to
			}
			p.mu.Unlock()
		}
		err := p.r.Scan(ctx, from, math.MaxInt64, func(b []bus.Message) error {
			return p.pace(ctx, sink, b, gen)
		})
		switch {
		case errors.Is(err, errSeek):
			continue
		case err != nil:
			return err
		case !p.opt.Hold:
			return nil
		}
		// Hold at the end until a seek or the end of ctx.
		for !p.seekChanged(gen) {
			if p.onWait != nil {
				p.onWait(p.Paused(), -1)
			}
			select {
			case <-p.wake:
			case <-ctx.Done():
				return ctx.Err()
			}
		}
	}
}

func (p *Replay) seekChanged(gen uint64) bool {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.seekGen != gen
}

// pace delivers batch as its messages fall due on the data clock.
func (p *Replay) pace(ctx context.Context, sink bus.Sink, batch []bus.Message, gen uint64) error {
	for i := 0; i < len(batch); {
		p.mu.Lock()
		if p.seekGen != gen {
			p.mu.Unlock()
			return errSeek
		}
		if p.paused {
			p.mu.Unlock()
			if p.onWait != nil {
				p.onWait(true, 0)
			}
			select {
			case <-p.wake:
				continue
			case <-ctx.Done():
				return ctx.Err()
			}
		}
		j := len(batch)
		var wait time.Duration
		if p.speed != 0 {
			dn := p.dataNowLocked(p.clock.Now())
			j = i
			for j < len(batch) && batch[j].T <= dn {
				j++
			}
			if j == i {
				wait = time.Duration(float64(batch[i].T-dn) / p.speed)
				wait = max(wait, p.opt.Granularity)
			}
		}
		if j > i {
			p.pos = batch[j-1].T
			p.mu.Unlock()
			sink.Deliver(batch[i:j])
			i = j
			if err := ctx.Err(); err != nil {
				return err
			}
			continue
		}
		p.mu.Unlock()
		timer := p.clock.After(wait)
		if p.onWait != nil { // after the timer exists: a test may advance its clock now
			p.onWait(false, wait)
		}
		select {
		case <-timer:
		case <-p.wake:
		case <-ctx.Done():
			return ctx.Err()
		}
	}
	return nil
}
