package bus

import (
	"strings"
	"testing"
	"time"
)

type fakeTime struct{ wall, mono int64 }

func (f *fakeTime) read() (int64, int64) { return f.wall, f.mono }
func (f *fakeTime) both(d time.Duration) { f.wall += int64(d); f.mono += int64(d) }

func TestLiveClock(t *testing.T) {
	const start = int64(1_700_000_000_000_000_000)
	ft := &fakeTime{wall: start, mono: 5}
	c := newLiveClock(ft.read)
	if got := c.Now(); got != start {
		t.Fatalf("Now at start = %d, want %d", got, start)
	}
	ft.both(time.Second)
	if got := c.Now(); got != start+int64(time.Second) {
		t.Fatalf("after 1 s: %d", got-start)
	}
	// NTP slew within tolerance: wall 100 ms ahead over 10 s: no gap, data
	// time follows the monotonic clock.
	ft.mono += int64(10 * time.Second)
	ft.wall += int64(10*time.Second + 100*time.Millisecond)
	if got := c.Now(); got != start+int64(11*time.Second) {
		t.Fatalf("after slew: %v", time.Duration(got-start))
	}
	if n, _ := c.Gaps(); n != 0 {
		t.Fatalf("slew counted as gap")
	}
	// Suspend for 1 h: the monotonic clock stops (Linux CLOCK_MONOTONIC),
	// the wall clock runs. One gap; data time catches up with the wall.
	ft.wall += int64(time.Hour)
	ft.both(time.Millisecond)
	got := c.Now()
	n, reason := c.Gaps()
	if n != 1 || !strings.Contains(reason, "suspend") {
		t.Fatalf("suspend: gaps %d %q", n, reason)
	}
	if got != ft.wall {
		t.Fatalf("after suspend data time %d, want wall %d", got, ft.wall)
	}
	// Wall clock stepped back 30 s: a gap, data time does not go back.
	before := c.Now()
	ft.wall -= int64(30 * time.Second)
	ft.both(time.Millisecond)
	after := c.Now()
	n, reason = c.Gaps()
	if n != 2 || !strings.Contains(reason, "stepped back 30s") {
		t.Fatalf("step back: gaps %d %q", n, reason)
	}
	if after != before+int64(time.Millisecond) {
		t.Fatalf("after step back: %d, want %d", after, before+int64(time.Millisecond))
	}
	// Steady again: no new gap.
	ft.both(time.Second)
	c.Now()
	if n, _ := c.Gaps(); n != 2 {
		t.Fatalf("gaps %d after steady second", n)
	}
}

func TestLiveClockReal(t *testing.T) {
	c := NewLiveClock()
	a := c.Now()
	b := c.Now()
	if b < a {
		t.Fatalf("went back: %d then %d", a, b)
	}
	if d := time.Duration(a - time.Now().UnixNano()); d > time.Second || d < -time.Second {
		t.Fatalf("live clock %v from wall", d)
	}
}
