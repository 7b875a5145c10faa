package record

import "time"

// Clock is the wall clock a Replay paces on. Tests inject a fake one.
type Clock interface {
	Now() time.Time
	// After sends the time on the returned channel once d has passed.
	After(d time.Duration) <-chan time.Time
}

// wallClock is the real Clock.
type wallClock struct{}

func (wallClock) Now() time.Time                         { return time.Now() }
func (wallClock) After(d time.Duration) <-chan time.Time { return time.After(d) }
