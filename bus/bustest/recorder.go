package bustest

import (
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"packwatch/bus"
)

// Event is one call a Recorder received: a delivered message or a status.
type Event struct {
	Msg    bus.Message
	Status bus.Status
	IsMsg  bool
}

// Recorder is a bus.Sink that keeps every message and status in arrival
// order, for tests. It copies each batch (a source reuses its slice).
type Recorder struct {
	mu      sync.Mutex
	events  []Event
	changed chan struct{}
}

// NewRecorder returns an empty Recorder.
func NewRecorder() *Recorder { return &Recorder{changed: make(chan struct{})} }

func (r *Recorder) notify() {
	close(r.changed)
	r.changed = make(chan struct{})
}

// Deliver implements bus.Sink.
func (r *Recorder) Deliver(batch []bus.Message) {
	r.mu.Lock()
	defer r.mu.Unlock()
	for _, m := range batch {
		r.events = append(r.events, Event{Msg: m, IsMsg: true})
	}
	r.notify()
}

// Status implements bus.Sink.
func (r *Recorder) Status(st bus.Status) {
	r.mu.Lock()
	defer r.mu.Unlock()
	r.events = append(r.events, Event{Status: st})
	r.notify()
}

// Events returns a copy of everything received so far.
func (r *Recorder) Events() []Event {
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]Event(nil), r.events...)
}

// Messages returns the delivered messages so far.
func (r *Recorder) Messages() []bus.Message {
	var out []bus.Message
	for _, e := range r.Events() {
		if e.IsMsg {
			out = append(out, e.Msg)
		}
	}
	return out
}

// Statuses returns the statuses so far.
func (r *Recorder) Statuses() []bus.Status {
	var out []bus.Status
	for _, e := range r.Events() {
		if !e.IsMsg {
			out = append(out, e.Status)
		}
	}
	return out
}

// WaitTimeout bounds every WaitFor. It is generous because the machine is
// shared; a passing test returns as soon as its condition holds.
const WaitTimeout = 20 * time.Second

// WaitFor blocks until cond holds for the events received so far, and fails
// the test after WaitTimeout, printing what was received.
func (r *Recorder) WaitFor(t testing.TB, what string, cond func(ev []Event) bool) {
	t.Helper()
	deadline := time.NewTimer(WaitTimeout)
	defer deadline.Stop()
	for {
		r.mu.Lock()
		ok := cond(r.events)
		ch := r.changed
		r.mu.Unlock()
		if ok {
			return
		}
		select {
		case <-ch:
		case <-deadline.C:
			t.Fatalf("timed out waiting for %s; received:\n%s", what, r.Summary())
		}
	}
}

// WaitStatus waits until the count-th status in state st (counting from 1).
func (r *Recorder) WaitStatus(t testing.TB, st bus.State, count int) {
	t.Helper()
	r.WaitFor(t, st.String()+" status", func(ev []Event) bool { return CountStatus(ev, st) >= count })
}

// CountStatus counts the statuses in state st.
func CountStatus(ev []Event, st bus.State) int {
	n := 0
	for _, e := range ev {
		if !e.IsMsg && e.Status.State == st {
			n++
		}
	}
	return n
}

// Summary lists the statuses and counts the messages, for failure output.
func (r *Recorder) Summary() string {
	var b strings.Builder
	msgs := 0
	for _, e := range r.Events() {
		if e.IsMsg {
			if e.Msg.Kind == bus.KindGap {
				b.WriteString("  gap: " + e.Msg.Text + "\n")
			}
			msgs++
			continue
		}
		b.WriteString("  status " + e.Status.State.String() + ": " + e.Status.Reason + "\n")
	}
	b.WriteString("  messages: ")
	b.WriteString(strconv.Itoa(msgs))
	return b.String()
}
