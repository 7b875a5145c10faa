package sim

import (
	"context"
	"testing"
	"time"

	"packwatch/bus"
	"packwatch/bus/bustest"
)

// simDriver makes a paused simulator emit messages: its one frame comes
// every 10 ms of data time, so data time gives the sequence number.
type simDriver struct {
	s     *Sim
	start int64
}

const confPeriod = 10 * time.Millisecond

func (d *simDriver) Send(t *testing.T, from, n int) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), bustest.WaitTimeout)
	defer cancel()
	// up to just before the frame numbered from+n
	until := time.Duration(from+n)*confPeriod - 1
	if err := d.s.Advance(ctx, until-d.s.State().Elapsed); err != nil {
		t.Fatal(err)
	}
}

func (d *simDriver) Seq(m bus.Message) (int, bool) {
	off := m.T - d.start
	if m.Kind != bus.KindCAN || off%int64(confPeriod) != 0 {
		return 0, false
	}
	return int(off / int64(confPeriod)), true
}

func (d *simDriver) Close() {}

// The simulator passes the bus sources' conformance suite: ordered delivery,
// monotonic data time, status transitions, a clean stop.
func TestBusConformance(t *testing.T) {
	dm := loadMap(t, "testdata/one-frame.toml")
	bustest.Run(t, bustest.Harness{New: func(t *testing.T) (bus.Source, bustest.Driver) {
		s, err := New(dm, Options{Speed: 1, Start: t0, Step: time.Millisecond})
		if err != nil {
			t.Fatal(err)
		}
		s.Pause()
		return s, &simDriver{s: s, start: t0.UnixNano()}
	}})
}
