package bus

import (
	"context"
	"fmt"
	"sync"
	"sync/atomic"
	"time"
)

// link is an open device: Read returns (0, nil) when nothing arrived within
// the idle poll interval, so the runner can check its diagnostics.
type link interface {
	Read(p []byte) (int, error)
	Close() error
}

// adapter is what differs between source kinds: how to connect, how bytes
// become messages, what to write on the way out.
type adapter interface {
	// connect opens the device, prepares it (slcan open sequence) and
	// returns the link and a description for the Connected status.
	connect(ctx context.Context, idle time.Duration) (link, string, error)
	// decode appends the messages in p, stamped t, to out.
	decode(p []byte, t int64, src uint16, out []Message) []Message
	// reset drops partial input after a reconnect.
	reset()
	// shutdown is called once on cancel, before the link is closed.
	shutdown(l link)
	// counts returns the decoder's counters: good units (frames or lines),
	// bad units, and the rest into st.
	counts(st *Stats) (good, bad uint64)
	// hint checks the adapter-specific health over a window (overrun).
	hint(w window) string
}

// window is what the runner saw over the last diagnostic period.
type window struct {
	dur   time.Duration
	bytes uint64
	good  uint64
	bad   uint64
}

// runner is the reconnecting read loop shared by all kinds.
type runner struct {
	spec Spec
	a    adapter
	ran  atomic.Bool

	mu    sync.Mutex // guards stats against Stats() during Run
	stats Stats
}

func newRunner(spec Spec, a adapter) *runner { return &runner{spec: spec, a: a} }

// Stats returns the source's counters so far.
func (r *runner) Stats() Stats {
	r.mu.Lock()
	defer r.mu.Unlock()
	return r.stats
}

// idlePoll is how often a link wakes up with no data to run diagnostics.
func (r *runner) idlePoll() time.Duration {
	if q := r.spec.Quiet / 2; q < time.Second {
		if q < time.Millisecond {
			return time.Millisecond
		}
		return q
	}
	return time.Second
}

// Run implements Source.
func (r *runner) Run(ctx context.Context, sink Sink) error {
	if !r.ran.CompareAndSwap(false, true) {
		return fmt.Errorf("source %s: Run called twice", r.spec.Device)
	}
	s := &session{r: r, sink: sink, clock: r.spec.Clock}
	if gc, ok := s.clock.(GapClock); ok {
		s.gapClock = gc
		s.clockGaps, _ = gc.Gaps()
	}
	s.status(StateConnecting, "opening "+r.spec.Device)
	delay := r.spec.RetryMin
	var lostAt int64
	var lostWhy string
	everConnected := false
	lastFail := ""
	for {
		l, desc, err := r.a.connect(ctx, r.idlePoll())
		if ctx.Err() != nil {
			if l != nil {
				l.Close()
			}
			break
		}
		if err != nil {
			if why := err.Error(); why != lastFail {
				lastFail = why
				s.status(StateDisconnected, why+"; retrying")
			}
			if r.spec.Sleep(ctx, delay) != nil {
				break
			}
			delay = min(2*delay, r.spec.RetryMax)
			continue
		}
		delay, lastFail = r.spec.RetryMin, ""
		r.a.reset()
		s.desc = desc
		s.status(StateConnected, desc)
		if everConnected {
			r.mu.Lock()
			r.stats.Reconnects++
			r.mu.Unlock()
			now := s.now()
			s.deliver([]Message{{T: now, Src: r.spec.Index, Kind: KindGap,
				Text: fmt.Sprintf("reconnected after %v (%s)", time.Duration(now-lostAt).Round(time.Millisecond), lostWhy)}})
		}
		everConnected = true
		err = s.readLoop(ctx, l)
		if ctx.Err() != nil {
			break
		}
		lostAt, lostWhy = s.now(), err.Error()
		s.status(StateDisconnected, lostWhy+"; retrying ("+r.Stats().summary()+")")
		if r.spec.Sleep(ctx, delay) != nil {
			break
		}
	}
	s.status(StateStopped, "stopped; "+r.Stats().summary())
	return nil
}

// session is the state of one Run.
type session struct {
	r         *runner
	sink      Sink
	clock     Clock
	gapClock  GapClock
	clockGaps uint64
	lastT     int64
	desc      string
	out       []Message
}

func (s *session) now() int64 {
	t := s.clock.Now()
	if t < s.lastT {
		t = s.lastT
	}
	s.lastT = t
	return t
}

func (s *session) status(st State, reason string) {
	s.sink.Status(Status{Src: s.r.spec.Index, T: s.now(), State: st, Reason: reason})
}

func (s *session) deliver(batch []Message) {
	gaps := uint64(0)
	msgs := uint64(0)
	for i := range batch {
		if batch[i].Kind == KindGap {
			gaps++
		} else {
			msgs++
		}
	}
	s.r.mu.Lock()
	s.r.stats.Gaps += gaps
	s.r.stats.Messages += msgs
	s.r.mu.Unlock()
	s.sink.Deliver(batch)
}

// readLoop reads until the link fails or ctx is cancelled. On cancel it
// lets the adapter say goodbye (slcan C) and closes the link; Read then
// fails and the loop returns.
func (s *session) readLoop(ctx context.Context, l link) error {
	closed := make(chan struct{})
	stop := context.AfterFunc(ctx, func() {
		defer close(closed)
		s.r.a.shutdown(l)
		l.Close()
	})
	defer func() {
		if stop() {
			l.Close()
		} else {
			<-closed
		}
	}()
	buf := make([]byte, 16<<10)
	if s.out == nil {
		s.out = make([]Message, 0, 256)
	}
	s.r.mu.Lock()
	good0, bad0 := s.r.a.counts(&s.r.stats)
	s.r.mu.Unlock()
	d := newDiagnoser(s.r.spec, s.now(), good0, bad0)
	for {
		n, err := l.Read(buf)
		now := s.now()
		if n > 0 {
			out := s.out[:0]
			if s.gapClock != nil {
				if g, why := s.gapClock.Gaps(); g != s.clockGaps {
					s.clockGaps = g
					out = append(out, Message{T: now, Src: s.r.spec.Index, Kind: KindGap, Text: why})
				}
			}
			out = s.r.a.decode(buf[:n], now, s.r.spec.Index, out)
			if len(out) > 0 {
				s.deliver(out)
			}
			s.out = out[:0]
		}
		s.r.mu.Lock()
		s.r.stats.Bytes += uint64(n)
		good, bad := s.r.a.counts(&s.r.stats)
		s.r.mu.Unlock()
		h, changed := d.check(now, uint64(n), good, bad, s.r.a)
		s.r.mu.Lock()
		s.r.stats.Hint, s.r.stats.Overrun = h, d.overrun
		s.r.mu.Unlock()
		if changed {
			reason := s.desc
			if h != "" {
				reason += "; " + h
			}
			s.status(StateConnected, reason)
		}
		if err != nil {
			if ctx.Err() != nil {
				return ctx.Err()
			}
			return err
		}
		if n > 0 && n < len(buf)/2 && s.r.spec.BatchWait > 0 {
			time.Sleep(s.r.spec.BatchWait)
		}
	}
}
