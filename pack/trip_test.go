package pack

import "testing"

// The time rules are PROFILE-SPEC.md "State and timing" (the project's own
// specification): past a limit for trip_after_ms → tripped; cleared when
// back inside by half the warn margin for clear_after_ms. The timers run on
// data time, so the readings below carry their own times.
func TestTripTiming(t *testing.T) {
	const ms = int64(1e6)
	rule := TripRule{TripAfterNs: 1000 * ms, ClearAfterNs: 3000 * ms, Warn: 0.05}
	type step struct {
		atMs   int64
		margin float64
		want   Level
		event  Event
	}
	tests := []struct {
		name  string
		steps []step
	}{
		{"trips at exactly trip_after, not before", []step{
			{1000, 0.1, LevelOK, EventNone},
			{2000, -0.01, LevelWarn, EventNone},
			{2999, -0.01, LevelWarn, EventNone},
			{3000, -0.01, LevelTrip, EventTripped},
			{3100, -0.02, LevelTrip, EventNone},
		}},
		{"back inside restarts the trip timer", []step{
			{1000, -0.01, LevelWarn, EventNone},
			{1900, 0.01, LevelWarn, EventNone},
			{2000, -0.01, LevelWarn, EventNone},
			{2999, -0.01, LevelWarn, EventNone},
			{3000, -0.01, LevelTrip, EventTripped},
		}},
		{"clears after clear_after inside by warn/2", []step{
			{1000, -0.01, LevelWarn, EventNone},
			{2000, -0.01, LevelTrip, EventTripped},
			{2500, 0.03, LevelTrip, EventNone}, // inside by ≥ 0.025: clear timer starts
			{5499, 0.03, LevelTrip, EventNone},
			{5500, 0.03, LevelWarn, EventCleared}, // 0.03 < warn 0.05
		}},
		{"inside but less than warn/2 never clears", []step{
			{0, -1, LevelWarn, EventNone},
			{1000, -1, LevelTrip, EventTripped},
			{2000, 0.02, LevelTrip, EventNone},
			{9000, 0.02, LevelTrip, EventNone},
		}},
		{"a dip below warn/2 restarts the clear timer", []step{
			{0, -1, LevelWarn, EventNone},
			{1000, -1, LevelTrip, EventTripped},
			{2000, 0.1, LevelTrip, EventNone},
			{4000, 0.01, LevelTrip, EventNone},
			{5000, 0.1, LevelTrip, EventNone},
			{7999, 0.1, LevelTrip, EventNone},
			{8000, 0.1, LevelOK, EventCleared},
		}},
		{"no reading keeps the trip", []step{
			{0, -1, LevelWarn, EventNone},
			{1000, -1, LevelTrip, EventTripped},
			{2000, nan, LevelTrip, EventNone},
		}},
		{"warn band", []step{
			{0, 0.049, LevelWarn, EventNone},
			{1, 0.05, LevelOK, EventNone},
			{2, 0, LevelWarn, EventNone}, // at the limit is not past it
		}},
	}
	for _, tc := range tests {
		var tr Trip
		for i, s := range tc.steps {
			ev := tr.Step(s.margin, s.atMs*ms, &rule)
			if tr.Level != s.want || ev != s.event {
				t.Errorf("%s, step %d (t=%d ms, margin %g): level %v event %d, want %v %d",
					tc.name, i, s.atMs, s.margin, tr.Level, ev, s.want, s.event)
			}
		}
	}
}

func TestTripDue(t *testing.T) {
	rule := TripRule{TripAfterNs: 1000, ClearAfterNs: 3000, Warn: 0.2}
	var tr Trip
	if d := tr.Due(&rule); d != never {
		t.Fatalf("idle check due %d, want never", d)
	}
	tr.Step(-1, 500, &rule)
	if d := tr.Due(&rule); d != 1500 {
		t.Fatalf("pending trip due %d, want 1500", d)
	}
	tr.Step(-1, 1500, &rule)
	if d := tr.Due(&rule); d != never {
		t.Fatalf("tripped, not clearing: due %d, want never", d)
	}
	tr.Step(1, 2000, &rule)
	if d := tr.Due(&rule); d != 5000 {
		t.Fatalf("clearing due %d, want 5000", d)
	}
}
