// Package bustest is a conformance suite every bus.Source must pass: ordered
// delivery, monotonic timestamps, a clean stop, status transitions, and gap
// reporting for sources that can lose their device. Each source kind's tests
// call Run with a Harness that knows how to make its device talk.
package bustest

import (
	"context"
	"strconv"
	"testing"
	"time"

	"packwatch/bus"
)

// Driver makes the device behind a source produce data.
type Driver interface {
	// Send makes the device emit n data messages carrying the sequence
	// numbers from, from+1, ... in that order. It is called only after the
	// source has reported StateConnected.
	Send(t *testing.T, from, n int)
	// Seq returns the sequence number a data message carries.
	Seq(m bus.Message) (int, bool)
	// Close releases the device; called when the subtest ends.
	Close()
}

// Unplugger is a Driver whose device can be taken away and brought back
// (a USB unplug, a dropped TCP connection).
type Unplugger interface {
	Driver
	Unplug(t *testing.T)
	Replug(t *testing.T)
}

// Harness connects the suite to one source kind.
type Harness struct {
	// New returns a fresh, not yet running source and its driver. The
	// source's backoff should be short (a few ms) so that reconnects are
	// quick.
	New func(t *testing.T) (bus.Source, Driver)
	// Lossy says the transport may drop data under load, so the suite
	// checks order but not completeness.
	Lossy bool
}

// running is a source started by the suite.
type running struct {
	rec    *Recorder
	cancel context.CancelFunc
	done   chan error
}

func start(t *testing.T, src bus.Source) *running {
	ctx, cancel := context.WithCancel(context.Background())
	r := &running{rec: NewRecorder(), cancel: cancel, done: make(chan error, 1)}
	go func() { r.done <- src.Run(ctx, r.rec) }()
	t.Cleanup(func() { r.stop(t) })
	return r
}

// stop cancels the source and waits for Run to return nil.
func (r *running) stop(t *testing.T) {
	t.Helper()
	r.cancel()
	select {
	case err, ok := <-r.done:
		if ok && err != nil {
			t.Errorf("Run returned %v after cancel, want nil", err)
		}
		if ok {
			close(r.done)
		}
	case <-time.After(WaitTimeout):
		t.Fatalf("Run did not return within %v of cancel; received:\n%s", WaitTimeout, r.rec.Summary())
	}
}

// Run runs the conformance suite against h.
func Run(t *testing.T, h Harness) {
	t.Run("OrderedDelivery", func(t *testing.T) { testOrdered(t, h) })
	t.Run("StatusTransitions", func(t *testing.T) { testStatus(t, h) })
	t.Run("CleanStop", func(t *testing.T) { testStop(t, h) })
	t.Run("Gap", func(t *testing.T) { testGap(t, h) })
	t.Run("StopWhileUnplugged", func(t *testing.T) { testStopUnplugged(t, h) })
}

func newDriven(t *testing.T, h Harness) (*running, Driver) {
	src, d := h.New(t)
	t.Cleanup(d.Close)
	return start(t, src), d
}

// dataSeqs returns the sequence numbers of the data messages in ev.
func dataSeqs(d Driver, ev []Event) []int {
	var out []int
	for _, e := range ev {
		if e.IsMsg && e.Msg.Kind != bus.KindGap {
			if s, ok := d.Seq(e.Msg); ok {
				out = append(out, s)
			}
		}
	}
	return out
}

func waitSeq(t *testing.T, r *running, d Driver, last int) {
	t.Helper()
	r.rec.WaitFor(t, "sequence number "+itoa(last), func(ev []Event) bool {
		s := dataSeqs(d, ev)
		return len(s) > 0 && s[len(s)-1] >= last
	})
}

func itoa(n int) string { return strconv.Itoa(n) }

// checkOrder checks strictly increasing sequence numbers (and, unless lossy,
// no hole) and non-decreasing timestamps over all messages.
func checkOrder(t *testing.T, h Harness, d Driver, ev []Event) {
	t.Helper()
	var lastT int64
	prev := -1
	for i, e := range ev {
		if !e.IsMsg {
			continue
		}
		m := e.Msg
		if m.T < lastT {
			t.Errorf("event %d: time went back from %d to %d", i, lastT, m.T)
		}
		lastT = m.T
		if m.Kind == bus.KindGap {
			continue
		}
		s, ok := d.Seq(m)
		if !ok {
			t.Errorf("event %d: message without a sequence number: %+v", i, m)
			continue
		}
		if s <= prev || (!h.Lossy && s != prev+1) {
			t.Errorf("event %d: sequence %d after %d", i, s, prev)
		}
		prev = s
	}
}

func testOrdered(t *testing.T, h Harness) {
	r, d := newDriven(t, h)
	r.rec.WaitStatus(t, bus.StateConnected, 1)
	const n = 2000
	for from := 0; from < n; from += 250 {
		d.Send(t, from, 250)
	}
	waitSeq(t, r, d, n-1)
	ev := r.rec.Events()
	checkOrder(t, h, d, ev)
	if s := dataSeqs(d, ev); !h.Lossy && len(s) != n {
		t.Errorf("got %d messages, want %d", len(s), n)
	}
	src := ev[0].Status.Src
	for _, e := range ev {
		if e.IsMsg && e.Msg.Src != src {
			t.Fatalf("message Src %d, status Src %d", e.Msg.Src, src)
		}
	}
}

func testStatus(t *testing.T, h Harness) {
	r, d := newDriven(t, h)
	r.rec.WaitStatus(t, bus.StateConnected, 1)
	d.Send(t, 0, 10)
	waitSeq(t, r, d, 9)
	r.stop(t)
	ev := r.rec.Events()
	if ev[0].IsMsg || ev[0].Status.State != bus.StateConnecting {
		t.Errorf("first event %+v, want a connecting status", ev[0])
	}
	last := ev[len(ev)-1]
	if last.IsMsg || last.Status.State != bus.StateStopped {
		t.Errorf("last event %+v, want a stopped status", last)
	}
	if n := CountStatus(ev, bus.StateStopped); n != 1 {
		t.Errorf("%d stopped statuses", n)
	}
	connected := false
	var lastT int64
	for i, e := range ev {
		if !e.IsMsg {
			if e.Status.State < bus.StateConnecting || e.Status.State > bus.StateStopped {
				t.Errorf("event %d: invalid state %d", i, e.Status.State)
			}
			if e.Status.State == bus.StateConnected {
				connected = true
			}
			if e.Status.Reason == "" {
				t.Errorf("event %d: status %v without a reason", i, e.Status.State)
			}
			if e.Status.T < lastT {
				t.Errorf("event %d: status time went back", i)
			}
			lastT = e.Status.T
			continue
		}
		if !connected {
			t.Errorf("event %d: message before the connected status", i)
		}
	}
}

func testStop(t *testing.T, h Harness) {
	r, d := newDriven(t, h)
	r.rec.WaitStatus(t, bus.StateConnected, 1)
	d.Send(t, 0, 100)
	waitSeq(t, r, d, 99)
	r.stop(t)
	n := len(r.rec.Events())
	// Run has returned: nothing may arrive any more. The caller's goleak
	// check proves no goroutine is left to send it.
	if m := len(r.rec.Events()); m != n {
		t.Errorf("%d events after Run returned", m-n)
	}
	// Cancel before anything connects: Run still returns nil and reports
	// stopped.
	src, d2 := h.New(t)
	defer d2.Close()
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	rec := NewRecorder()
	if err := src.Run(ctx, rec); err != nil {
		t.Errorf("Run on a cancelled context: %v", err)
	}
	sts := rec.Statuses()
	if len(sts) == 0 || sts[len(sts)-1].State != bus.StateStopped {
		t.Errorf("cancelled before connect: statuses %+v, want stopped last", sts)
	}
}

func testGap(t *testing.T, h Harness) {
	src, d := h.New(t)
	t.Cleanup(d.Close)
	u, ok := d.(Unplugger)
	if !ok {
		t.Skip("this source's device cannot be unplugged")
	}
	r := start(t, src)
	r.rec.WaitStatus(t, bus.StateConnected, 1)
	u.Send(t, 0, 100)
	waitSeq(t, r, u, 99)
	u.Unplug(t)
	r.rec.WaitStatus(t, bus.StateDisconnected, 1)
	u.Replug(t)
	r.rec.WaitFor(t, "reconnect and gap", func(ev []Event) bool {
		for _, e := range ev {
			if e.IsMsg && e.Msg.Kind == bus.KindGap {
				return true
			}
		}
		return false
	})
	u.Send(t, 100, 100)
	waitSeq(t, r, u, 199)
	ev := r.rec.Events()
	checkOrder(t, h, u, ev)
	// The gap sits between the last message before the unplug and the
	// first after, and says why.
	gapAt, seq99, seq100 := -1, -1, -1
	for i, e := range ev {
		if !e.IsMsg {
			continue
		}
		if e.Msg.Kind == bus.KindGap {
			if e.Msg.Text == "" {
				t.Errorf("gap without a reason")
			}
			if gapAt < 0 {
				gapAt = i
			}
			continue
		}
		switch s, _ := u.Seq(e.Msg); s {
		case 99:
			seq99 = i
		case 100:
			seq100 = i
		}
	}
	if !(seq99 < gapAt && gapAt < seq100) {
		t.Errorf("gap at event %d, want between %d (seq 99) and %d (seq 100)", gapAt, seq99, seq100)
	}
	if n := CountStatus(ev, bus.StateConnected); n < 2 {
		t.Errorf("%d connected statuses, want 2 or more", n)
	}
}

func testStopUnplugged(t *testing.T, h Harness) {
	src, d := h.New(t)
	t.Cleanup(d.Close)
	u, ok := d.(Unplugger)
	if !ok {
		t.Skip("this source's device cannot be unplugged")
	}
	r := start(t, src)
	r.rec.WaitStatus(t, bus.StateConnected, 1)
	u.Unplug(t)
	r.rec.WaitStatus(t, bus.StateDisconnected, 1)
	r.stop(t)
	sts := r.rec.Statuses()
	if sts[len(sts)-1].State != bus.StateStopped {
		t.Errorf("last status %v, want stopped", sts[len(sts)-1].State)
	}
}
