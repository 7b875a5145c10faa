package sim

import (
	"context"
	"fmt"
	"math"
	"sync/atomic"
	"testing"
	"time"

	"packwatch/bus"
	"packwatch/decode"
)

var t0 = time.Date(2026, 5, 1, 8, 0, 0, 0, time.UTC)

func newBuoySim(t *testing.T, opt Options) (*Sim, *decode.Map) {
	t.Helper()
	dm := loadMap(t, buoyProfile)
	if opt.Scenario == nil {
		opt.Scenario = BuoyWinchScenario()
	}
	if opt.Start.IsZero() {
		opt.Start = t0
	}
	s, err := New(dm, opt)
	if err != nil {
		t.Fatal(err)
	}
	return s, dm
}

// The default speed shows one pass of the story in about ten minutes.
func TestDefaultSpeed(t *testing.T) {
	s, _ := newBuoySim(t, Options{})
	l := s.StoryLength()
	if l < 10*time.Hour || l > 15*time.Hour {
		t.Errorf("buoy story is %v long; expected 10–15 h of simulated time", l)
	}
	if show := time.Duration(float64(l) / s.Speed()); show < 9*time.Minute || show > 11*time.Minute {
		t.Errorf("speed %g shows the story in %v, want about 10 min", s.Speed(), show)
	}
	fast, _ := newBuoySim(t, Options{Speed: SpeedMax})
	if !math.IsInf(fast.Speed(), 1) {
		t.Errorf("SpeedMax gives speed %g", fast.Speed())
	}
}

// Run at full speed for a simulated stretch: the real decoder reads back
// what the model holds, every source reports, data time is simulated time.
func TestRunDecodesModel(t *testing.T) {
	s, dm := newBuoySim(t, Options{Speed: SpeedMax, For: 5 * time.Minute, Seed: 3})
	sink := newDecodeSink(dm)
	if err := s.Run(context.Background(), sink); err != nil {
		t.Fatal(err)
	}
	st := s.State()
	if st.Elapsed < 5*time.Minute-100*time.Millisecond || st.Elapsed > 5*time.Minute {
		t.Fatalf("elapsed %v, want 5 min", st.Elapsed)
	}
	if want := t0.Add(5 * time.Minute).UnixNano(); sink.lastT > want || sink.lastT < want-int64(time.Second) {
		t.Errorf("last message at %v, want just before %v", time.Unix(0, sink.lastT).UTC(), t0.Add(5*time.Minute))
	}
	if !sink.order {
		t.Error("data time went backwards within a source")
	}
	// the pack rests in the first 10 minutes: the readings are steady, so
	// the last decoded value must equal the model within one count
	for k := 1; k <= 12; k++ {
		v, fl := sink.value(t, fmt.Sprintf("cell[%d].voltage", k))
		if fl != decode.FlagOK || math.Abs(v-st.CellV[k-1]) > 0.001 {
			t.Errorf("cell %d decoded %.4f V (%v), model %.4f V", k, v, fl, st.CellV[k-1])
		}
	}
	for k := 1; k <= 3; k++ {
		v, fl := sink.value(t, fmt.Sprintf("temp[%d]", k))
		if fl != decode.FlagOK || math.Abs(v-st.TempC[k-1]) > 1 {
			t.Errorf("temp %d decoded %g (%v), model %.2f", k, v, fl, st.TempC[k-1])
		}
	}
	if v, _ := sink.value(t, "pack.voltage"); math.Abs(v-st.PackV) > 0.01 {
		t.Errorf("pack voltage decoded %g, model %g", v, st.PackV)
	}
	if v, _ := sink.value(t, "bms.state"); v != 0 {
		t.Errorf("bms.state %g at rest, want 0 (idle)", v)
	}
	// 5 min: 0x4C0 every 100 ms, 0x4D0 every 50 ms, 0x4E0 every 500 ms
	// → 3000 + 6000 + 600 frames; console 12 lines a second → 3600 lines
	if got := sink.bySrc[0]; got < 9590 || got > 9610 {
		t.Errorf("%d frames from bms, want about 9600", got)
	}
	if got := sink.bySrc[1]; got < 3588 || got > 3612 {
		t.Errorf("%d lines from the console, want about 3600", got)
	}
	for src := range 2 {
		c := sink.v.Src[src]
		if c.Unknown != 0 || c.DecodeErrors != 0 {
			t.Errorf("source %d: %d unknown, %d decode errors", src, c.Unknown, c.DecodeErrors)
		}
	}
	if s.EncodeErrors() != 0 {
		t.Errorf("%d encode errors", s.EncodeErrors())
	}
	if len(sink.status) != 6 || sink.status[0].State != bus.StateConnecting || sink.status[1].State != bus.StateConnected || sink.status[5].State != bus.StateStopped {
		t.Errorf("status reports %+v", sink.status)
	}
}

// Pause, force a cell past its limit, advance simulated time by hand:
// what a browser test does to hold the page still.
func TestPauseForceAdvance(t *testing.T) {
	var wall atomic.Int64
	ticks := make(chan time.Time)
	s, dm := newBuoySim(t, Options{Speed: 1, Ticks: ticks,
		Now: func() time.Time { return t0.Add(time.Duration(wall.Load())) }})
	sink := newDecodeSink(dm)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Run(ctx, sink) }()
	defer func() {
		cancel()
		if err := <-done; err != nil {
			t.Error(err)
		}
	}()
	s.Pause()
	if err := s.ForceCell(5, 4.40); err != nil {
		t.Fatal(err)
	}
	if err := s.ForceCell(13, 4.40); err == nil {
		t.Error("cell 13 of 12 accepted")
	}
	before := s.State().Elapsed
	if err := s.Advance(ctx, 3*time.Second); err != nil {
		t.Fatal(err)
	}
	if v, fl := sink.value(t, "cell[5].voltage"); v != 4.40 || fl != decode.FlagOK {
		t.Errorf("forced cell 5 decoded %g (%v), want 4.40", v, fl)
	}
	after := s.State()
	if d := after.Elapsed - before; d < 2900*time.Millisecond || d > 3*time.Second {
		t.Errorf("Advance(3s) moved simulated time by %v", d)
	}
	if !after.Paused {
		t.Error("not paused")
	}
	// paused: nothing more arrives however long we look
	n := sink.count()
	if err := s.Advance(ctx, 0); err != nil { // a round trip through Run's loop
		t.Fatal(err)
	}
	if sink.count() != n {
		t.Errorf("%d messages arrived while paused", sink.count()-n)
	}
	if err := s.ForceCell(5, math.NaN()); err != nil {
		t.Fatal(err)
	}
	if err := s.Advance(ctx, time.Second); err != nil {
		t.Fatal(err)
	}
	if v, _ := sink.value(t, "cell[5].voltage"); v > 4 {
		t.Errorf("released cell 5 still reads %g", v)
	}
	n = sink.count()
	s.Resume()
	ticks <- time.Time{} // taken after Run re-anchors
	wall.Add(int64(2 * time.Second))
	ticks <- time.Time{}
	ticks <- time.Time{} // the one before has been served
	if got := sink.count() - n; got < 80 || got > 96 {
		t.Errorf("%d messages in 2 s after Resume at speed 1, want about 88", got)
	}
}

func (d *decodeSink) count() int {
	d.mu.Lock()
	defer d.mu.Unlock()
	return d.n
}

// waitFor polls a condition (no fixed sleeps deciding the outcome).
func waitFor(t *testing.T, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(20 * time.Second)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatal("condition not met in 20 s")
		}
		time.Sleep(5 * time.Millisecond)
	}
}

// Paced runs keep to the speed in data time per wall time only roughly
// (machine load); what must hold is that Run stops on cancel and that data
// time is simulated time from Start.
func TestRunStopsOnCancel(t *testing.T) {
	s, dm := newBuoySim(t, Options{Speed: 100})
	sink := newDecodeSink(dm)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Run(ctx, sink) }()
	waitFor(t, func() bool { return sink.count() > 200 })
	cancel()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	sink.mu.Lock()
	last := sink.lastT
	sink.mu.Unlock()
	if st := s.State(); last > st.T.UnixNano()+int64(time.Second) || last < t0.UnixNano() {
		t.Errorf("last message at %v, simulated time %v", time.Unix(0, last).UTC(), st.T)
	}
	if err := s.Run(ctx, sink); err != nil { // a cancelled context ends a second Run at once
		t.Fatal(err)
	}
}

// Pacing on an injected wall clock: at speed 50, 10 s of wall time is 500 s
// of data time, and paused wall time does not count.
func TestRunPacing(t *testing.T) {
	var wall atomic.Int64
	base := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	ticks := make(chan time.Time)
	s, dm := newBuoySim(t, Options{Speed: 50,
		Now:   func() time.Time { return base.Add(time.Duration(wall.Load())) },
		Ticks: ticks})
	sink := newDecodeSink(dm)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Run(ctx, sink) }()
	defer func() {
		cancel()
		if err := <-done; err != nil {
			t.Error(err)
		}
	}()
	tick := func() { ticks <- time.Time{} } // returns once Run has taken it
	elapsed := func(want time.Duration) {
		t.Helper()
		tick() // the one before is processed once Run takes this one
		if got := s.State().Elapsed; got != want {
			t.Fatalf("elapsed %v, want %v", got, want)
		}
	}
	tick() // Run has started and taken its anchor
	wall.Add(int64(10 * time.Second))
	tick()
	elapsed(500 * time.Second)
	s.Pause()
	wall.Add(int64(100 * time.Second)) // paused: does not count
	s.Resume()
	tick() // Run re-anchors before it takes this one
	wall.Add(int64(2 * time.Second))
	tick()
	elapsed(600 * time.Second)
	// 0 to 600 s inclusive: 0x4C0 at 0 + k·100 ms (6001), 0x4D0 at 1 ms +
	// k·50 ms (12000), 0x4E0 at 2 ms + k·500 ms (1200), 12 console lines at
	// 0.5 ms + k·1 s (7200)
	if n := sink.count(); n != 26401 {
		t.Errorf("%d messages for 600 s, want 26401", n)
	}
}
