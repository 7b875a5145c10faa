package record

import (
	"context"
	"path/filepath"
	"reflect"
	"sync"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
)

// fakeClock is a Clock that moves only when the test advances it.
type fakeClock struct {
	mu      sync.Mutex
	now     time.Time
	waiters []fakeWaiter
}

type fakeWaiter struct {
	at time.Time
	ch chan time.Time
}

func (c *fakeClock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.now
}

func (c *fakeClock) After(d time.Duration) <-chan time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	ch := make(chan time.Time, 1)
	if d <= 0 {
		ch <- c.now
		return ch
	}
	c.waiters = append(c.waiters, fakeWaiter{c.now.Add(d), ch})
	return ch
}

func (c *fakeClock) Advance(d time.Duration) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.now = c.now.Add(d)
	keep := c.waiters[:0]
	for _, w := range c.waiters {
		if !w.at.After(c.now) {
			w.ch <- c.now
		} else {
			keep = append(keep, w)
		}
	}
	c.waiters = keep
}

// recSink keeps what a replay delivers.
type recSink struct {
	mu     sync.Mutex
	msgs   []bus.Message
	status []bus.Status
}

func (s *recSink) Deliver(b []bus.Message) {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.msgs = append(s.msgs, b...)
}

func (s *recSink) Status(st bus.Status) {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.status = append(s.status, st)
}

func (s *recSink) count() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return len(s.msgs)
}

func (s *recSink) take() []bus.Message {
	s.mu.Lock()
	defer s.mu.Unlock()
	m := s.msgs
	s.msgs = nil
	return m
}

const t0 = int64(1_773_000_000e9)

// replayFile records n frames, frame k at t0 + k·100 ms carrying k.
func replayFile(t *testing.T, n int) *Reader {
	t.Helper()
	path := filepath.Join(t.TempDir(), "replay.db")
	w, err := Create(path, testMeta, Options{})
	if err != nil {
		t.Fatal(err)
	}
	for k := range n {
		w.Write([]bus.Message{{T: t0 + int64(k)*100e6, Kind: bus.KindCAN, Src: 0,
			Frame: can.Frame{ID: 0x300, Length: 1, Data: can.Data{byte(k)}}}})
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { r.Close() })
	return r
}

// waitState is Run about to block: paused or waiting d (−1: held at the
// end), after n messages were delivered since the last take.
type waitState struct {
	paused bool
	d      time.Duration
	n      int
}

// harness runs a replay on a fake clock and reports each time Run blocks.
type harness struct {
	t     *testing.T
	clock *fakeClock
	sink  *recSink
	p     *Replay
	waits chan waitState
	done  chan error
	seeks chan int64
}

func startReplay(t *testing.T, r *Reader, opt ReplayOptions) *harness {
	h := &harness{t: t, clock: &fakeClock{now: time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)},
		sink: &recSink{}, waits: make(chan waitState, 1000), done: make(chan error, 1), seeks: make(chan int64, 10)}
	opt.Clock = h.clock
	opt.OnSeek = func(t int64) {
		h.sink.take()
		h.seeks <- t
	}
	h.p = NewReplay(r, opt)
	h.p.onWait = func(paused bool, d time.Duration) { h.waits <- waitState{paused, d, h.sink.count()} }
	ctx, cancel := context.WithCancel(context.Background())
	go func() { h.done <- h.p.Run(ctx, h.sink) }()
	t.Cleanup(func() {
		cancel()
		<-h.done
	})
	return h
}

// settle waits until Run blocks in a state for which ok holds.
func (h *harness) settle(ok func(waitState) bool) waitState {
	h.t.Helper()
	timeout := time.After(60 * time.Second) // a failure guard for a hang, not a timing assumption
	var last waitState
	for {
		select {
		case w := <-h.waits:
			if ok(w) {
				return w
			}
			last = w
		case err := <-h.done:
			h.t.Fatalf("Run returned %v", err)
		case <-timeout:
			h.t.Fatalf("replay never blocked in the expected state; last %+v", last)
		}
	}
}

func playing(w waitState) bool { return !w.paused }

func frames(msgs []bus.Message) []int {
	out := make([]int, len(msgs))
	for i, m := range msgs {
		out[i] = int(m.Frame.Data[0])
	}
	return out
}

func TestReplayPacing(t *testing.T) {
	r := replayFile(t, 50)
	h := startReplay(t, r, ReplayOptions{Speed: 1})

	w := h.settle(playing)
	if w.n != 1 || w.d != 100*time.Millisecond {
		t.Fatalf("at start: %+v; want 1 delivered, waiting 100ms", w)
	}
	h.clock.Advance(250 * time.Millisecond)
	w = h.settle(playing)
	if w.n != 3 || w.d != 50*time.Millisecond {
		t.Fatalf("after 250 ms: %+v; want 3 delivered, waiting 50ms", w)
	}
	if pos := h.p.Position(); pos != t0+250e6 {
		t.Errorf("position %d, want t0+250ms", pos-t0)
	}

	// Twice as fast: 50 ms of data to the next frame is 25 ms of wall time.
	h.p.SetSpeed(2)
	w = h.settle(func(w waitState) bool { return !w.paused && w.d == 25*time.Millisecond })
	h.clock.Advance(100 * time.Millisecond) // 200 ms of data: frames 3 and 4
	if w = h.settle(playing); w.n != 5 {
		t.Fatalf("at 2×: %+v, want 5 delivered", w)
	}

	// Paused, the data clock stands still whatever the wall clock does.
	h.p.Pause()
	h.settle(func(w waitState) bool { return w.paused })
	h.clock.Advance(10 * time.Second)
	if pos := h.p.Position(); pos != t0+450e6 {
		t.Errorf("paused position t0+%v, want t0+450ms", time.Duration(pos-t0))
	}
	h.p.Play()
	w = h.settle(playing)
	if w.n != 5 || w.d != 25*time.Millisecond {
		t.Fatalf("after pause: %+v, want 5 delivered, waiting 25ms", w)
	}

	// Seek to 3 s: reset, fast-forward frames 0–29 at once, then frame 30 is due.
	h.p.Seek(3 * time.Second)
	if got := <-h.seeks; got != t0+3e9 {
		t.Fatalf("OnSeek(t0+%v), want 3s", time.Duration(got-t0))
	}
	w = h.settle(func(w waitState) bool { return !w.paused && w.n == 31 })
	got := frames(h.sink.take())
	if len(got) != 31 || got[0] != 0 || got[30] != 30 || w.d != 50*time.Millisecond {
		t.Fatalf("after seek: frames %v, waiting %v", got, w.d)
	}

	// Full speed: the rest at once, then Run returns at the end.
	h.p.SetSpeed(0)
	select {
	case err := <-h.done:
		if err != nil {
			t.Fatal(err)
		}
		h.done <- nil // for the cleanup
	case <-time.After(60 * time.Second): // a failure guard for a hang
		t.Fatal("Run did not return at the end")
	}
	got = frames(h.sink.take())
	if len(got) != 19 || got[0] != 31 || got[18] != 49 {
		t.Fatalf("at full speed: frames %v", got)
	}
	if pos := h.p.Position(); pos != t0+49*100e6 {
		t.Errorf("end position t0+%v", time.Duration(pos-t0))
	}
	h.sink.mu.Lock()
	defer h.sink.mu.Unlock()
	var states []bus.State
	for _, st := range h.sink.status {
		states = append(states, st.State)
	}
	want := []bus.State{bus.StateConnecting, bus.StateConnecting, bus.StateConnected, bus.StateConnected, bus.StateStopped, bus.StateStopped}
	if !reflect.DeepEqual(states, want) {
		t.Errorf("status %v, want %v", states, want)
	}
}

// TestReplaySeekWhilePausedAndHold: a seek while paused fast-forwards and
// stays paused; with Hold, the end waits for a seek back.
func TestReplaySeekWhilePausedAndHold(t *testing.T) {
	r := replayFile(t, 20)
	h := startReplay(t, r, ReplayOptions{Speed: 1, Paused: true, Hold: true})
	h.settle(func(w waitState) bool { return w.paused })
	if n := h.sink.count(); n != 0 {
		t.Fatalf("started paused, %d delivered", n)
	}
	h.p.Seek(time.Second)
	<-h.seeks
	h.settle(func(w waitState) bool { return w.paused && w.n == 10 })
	if got := frames(h.sink.take()); len(got) != 10 || got[9] != 9 {
		t.Fatalf("seek while paused: %v", got)
	}
	h.p.SetSpeed(0)
	h.p.Play()
	h.settle(func(w waitState) bool { return w.d == -1 && w.n == 10 }) // holding at the end
	if got := frames(h.sink.take()); len(got) != 10 || got[0] != 10 {
		t.Fatalf("rest: %v", got)
	}
	h.p.Seek(0)
	<-h.seeks
	h.settle(func(w waitState) bool { return w.d == -1 && w.n == 20 })
	if got := frames(h.sink.take()); len(got) != 20 {
		t.Fatalf("after seeking back: %v", got)
	}
}

func TestReplayCancel(t *testing.T) {
	r := replayFile(t, 20)
	p := NewReplay(r, ReplayOptions{Speed: 1}) // real clock: 2 s of data
	ctx, cancel := context.WithCancel(context.Background())
	sink := &recSink{}
	done := make(chan error, 1)
	go func() { done <- p.Run(ctx, sink) }()
	cancel()
	if err := <-done; err != nil {
		t.Fatalf("Run returned %v after cancel, want nil (the bus source contract)", err)
	}
	if err := p.SetSpeed(-1); err == nil {
		t.Error("negative speed accepted")
	}
}
