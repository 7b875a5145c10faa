package pack

import "math"

// Level is the state of one limit check.
type Level uint8

// Check levels, in rising order of concern.
const (
	LevelNoData Level = iota // no valid reading to compare
	LevelOK
	LevelWarn // inside the limit but nearer than the warn margin
	LevelTrip // past the limit for trip_after; stays until cleared
)

// String gives the level's name as used in snapshots.
func (l Level) String() string {
	switch l {
	case LevelOK:
		return "ok"
	case LevelWarn:
		return "warn"
	case LevelTrip:
		return "trip"
	}
	return "nodata"
}

// Alarm timing defaults, used when the profile's [alarm] leaves them out.
const (
	DefaultTripAfterNs  = 1_000_000_000
	DefaultClearAfterNs = 3_000_000_000
)

// never is a deadline that does not come.
const never = math.MaxInt64

// TripRule is the time rule of a limit check.
type TripRule struct {
	TripAfterNs  int64   // past the limit this long (data time) → tripped
	ClearAfterNs int64   // back inside by Warn/2 this long → cleared
	Warn         float64 // warn margin, in the limit's unit, ≥ 0
}

// Trip is the timer state of one limit check, on data time. Step it with the
// signed margin (positive inside, negative past the limit) of each reading.
type Trip struct {
	Level      Level
	Past       bool  // the latest reading was past the limit
	PastSince  int64 // data time the readings first went past (when Past)
	Clearing   bool  // a tripped check reads clear
	ClearSince int64 // data time a tripped check first read clear (when Clearing)
	TrippedAt  int64 // data time of the latest trip
}

// Event is what a Step changed.
type Event uint8

// Step events.
const (
	EventNone Event = iota
	EventTripped
	EventCleared
)

// Step takes one reading's margin at data time t and applies the rules:
// a reading past the limit (margin < 0) starts the trip timer, and the check
// trips when readings have stayed past for TripAfterNs (at exactly that
// time, not before); a tripped check clears once readings have stayed inside
// by at least Warn/2 for ClearAfterNs. Below the trip, the level is warn when
// the margin is under Warn. A NaN margin (no valid reading) resets the
// timers but leaves a trip standing.
func (tr *Trip) Step(margin float64, t int64, r *TripRule) Event {
	if math.IsNaN(margin) {
		tr.Past, tr.Clearing = false, false
		if tr.Level != LevelTrip {
			tr.Level = LevelNoData
		}
		return EventNone
	}
	if margin < 0 {
		tr.Clearing = false
		if !tr.Past {
			tr.Past, tr.PastSince = true, t
		}
		if tr.Level == LevelTrip {
			return EventNone
		}
		if t-tr.PastSince >= r.TripAfterNs {
			tr.Level = LevelTrip
			tr.TrippedAt = t
			return EventTripped
		}
		tr.Level = LevelWarn
		return EventNone
	}
	tr.Past = false
	if tr.Level == LevelTrip {
		if margin < r.Warn/2 {
			tr.Clearing = false
			return EventNone
		}
		if !tr.Clearing {
			tr.Clearing, tr.ClearSince = true, t
		}
		if t-tr.ClearSince < r.ClearAfterNs {
			return EventNone
		}
		tr.Clearing = false
		tr.Level = levelOf(margin, r.Warn)
		return EventCleared
	}
	tr.Level = levelOf(margin, r.Warn)
	return EventNone
}

func levelOf(margin, warn float64) Level {
	if margin < warn {
		return LevelWarn
	}
	return LevelOK
}

// Due is the data time at which the check would change if the last reading
// held: the end of a running trip or clear timer; never when none runs.
func (tr *Trip) Due(r *TripRule) int64 {
	switch {
	case tr.Past && tr.Level != LevelTrip:
		return tr.PastSince + r.TripAfterNs
	case tr.Clearing && tr.Level == LevelTrip:
		return tr.ClearSince + r.ClearAfterNs
	}
	return never
}
