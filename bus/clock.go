package bus

import (
	"fmt"
	"sync"
	"time"
)

// Clock gives a source its data time, in nanoseconds since the Unix epoch.
// Now must never go backwards.
type Clock interface {
	Now() int64
}

// GapClock is a Clock that also knows when its time broke: a suspend or a
// wall clock step. Gaps returns how many breaks it has seen so far and the
// reason of the latest; a source that sees the count change delivers a
// KindGap message before its next data.
type GapClock interface {
	Clock
	Gaps() (n uint64, reason string)
}

// Step detection tolerance: the wall clock may drift from the monotonic
// clock by NTP slewing (at most 500 ppm; common practice, no source), so a
// divergence counts as a step only beyond a fixed 250 ms plus 1 ms per second
// between two readings.
const (
	stepTolerance    = 250 * time.Millisecond
	stepTolerancePPM = 1000
)

// LiveClock is the clock of live sources: the wall time at start plus the
// monotonic time elapsed since, so that data time neither jumps nor stalls
// when the wall clock is adjusted. Each call to Now compares the monotonic
// clock with the wall clock; when they diverge (the machine was suspended,
// which stops the monotonic clock on Linux and macOS, or the wall clock was
// stepped) it counts a gap. After a forward divergence data time catches up
// with the wall clock; after a backward step it keeps running from where it
// was, so it never goes back. A LiveClock is safe for concurrent use and may
// be shared by several sources.
type LiveClock struct {
	mu       sync.Mutex
	read     func() (wall, mono int64)
	base     int64 // data time at the last rebase
	mono0    int64 // monotonic reading at the last rebase
	lastWall int64
	lastMono int64
	last     int64 // last value returned
	gaps     uint64
	reason   string
}

// NewLiveClock returns a LiveClock started now.
func NewLiveClock() *LiveClock {
	start := time.Now()
	return newLiveClock(func() (int64, int64) {
		t := time.Now()
		return t.UnixNano(), int64(t.Sub(start))
	})
}

// newLiveClock builds a LiveClock on a reading function returning the wall
// time (ns since the epoch) and a monotonic time (ns since any origin).
func newLiveClock(read func() (wall, mono int64)) *LiveClock {
	wall, mono := read()
	return &LiveClock{read: read, base: wall, mono0: mono, lastWall: wall, lastMono: mono, last: wall}
}

// Now returns the data time in ns since the Unix epoch.
func (c *LiveClock) Now() int64 {
	wall, mono := c.read()
	c.mu.Lock()
	defer c.mu.Unlock()
	dMono := mono - c.lastMono
	skew := (wall - c.lastWall) - dMono
	tol := int64(stepTolerance) + dMono/stepTolerancePPM
	if skew > tol || skew < -tol {
		c.gaps++
		if skew > 0 {
			c.reason = fmt.Sprintf("wall clock ran %v ahead of the monotonic clock (suspend or clock step)", time.Duration(skew).Round(time.Millisecond))
		} else {
			c.reason = fmt.Sprintf("wall clock stepped back %v", time.Duration(-skew).Round(time.Millisecond))
		}
		if t := c.base + (mono - c.mono0); wall > t {
			c.base, c.mono0 = wall, mono
		}
	}
	c.lastWall, c.lastMono = wall, mono
	t := c.base + (mono - c.mono0)
	if t < c.last {
		t = c.last
	}
	c.last = t
	return t
}

// Gaps returns the number of suspends or clock steps seen and the reason of
// the latest.
func (c *LiveClock) Gaps() (uint64, string) {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.gaps, c.reason
}
