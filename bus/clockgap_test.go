//go:build unix

package bus_test

import (
	"sync"
	"testing"

	"packwatch/bus"
	"packwatch/bus/bustest"
)

// fakeGapClock advances 1 ms a reading and reports a gap when told to.
type fakeGapClock struct {
	mu   sync.Mutex
	t    int64
	gaps uint64
	why  string
}

func (c *fakeGapClock) Now() int64 {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.t += 1e6
	return c.t
}

func (c *fakeGapClock) Gaps() (uint64, string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.gaps, c.why
}

func (c *fakeGapClock) jump(why string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.t += 3600e9
	c.gaps++
	c.why = why
}

// A suspend or clock step seen by the clock reaches the engine as a KindGap
// message before the next data, with the clock's reason.
func TestClockGapDelivered(t *testing.T) {
	d := newTCPDriver(t)
	defer d.Close()
	clk := &fakeGapClock{t: 1_700_000_000e9}
	spec := testSpec(bus.KindTCPCAN, d.addr)
	spec.Clock = clk
	src := mustOpen(t, spec)
	rec := runSource(t, src)
	rec.WaitStatus(t, bus.StateConnected, 1)
	d.Send(t, 0, 10)
	rec.WaitFor(t, "10 frames", func(ev []bustest.Event) bool { return len(dataSeqsOf(d, ev)) == 10 })
	clk.jump("wall clock ran 1h0m0s ahead of the monotonic clock (suspend or clock step)")
	d.Send(t, 10, 10)
	rec.WaitFor(t, "20 frames", func(ev []bustest.Event) bool { return len(dataSeqsOf(d, ev)) == 20 })
	msgs := rec.Messages()
	var gapAt, at10 int = -1, -1
	for i, m := range msgs {
		if m.Kind == bus.KindGap && gapAt < 0 {
			gapAt = i
			if m.Text != clk.why {
				t.Errorf("gap text %q", m.Text)
			}
		}
		if s, ok := frameSeq(m); ok && s == 10 {
			at10 = i
		}
	}
	if gapAt != 10 || at10 != 11 {
		t.Errorf("gap at %d, seq 10 at %d; want 10 and 11", gapAt, at10)
	}
	if msgs[at10].T-msgs[at10-2].T < 3600e9 {
		t.Errorf("data time did not jump across the gap")
	}
	if st := src.(interface{ Stats() bus.Stats }).Stats(); st.Gaps != 1 || st.Messages != 20 {
		t.Errorf("stats %+v", st)
	}
}
