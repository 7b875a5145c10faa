package sim

import (
	"context"
	"testing"
	"time"

	"packwatch/bus"
)

type countSink struct{ n int }

func (c *countSink) Deliver(b []bus.Message) { c.n += len(b) }
func (c *countSink) Status(bus.Status)       {}

// BenchmarkSimulateHour: one simulated hour of a 100-cell pack with the
// physics at 10 Hz, every frame of its profile encoded (about 170 frames/s
// of data time), delivered to a sink that only counts. The x_realtime
// metric is simulated time over wall time (goal ≥ 10,000).
func BenchmarkSimulateHour(b *testing.B) {
	dm := loadMap(b, "testdata/pack100.toml")
	var msgs int
	cpu0 := processCPU()
	for b.Loop() {
		s, err := New(dm, Options{Speed: SpeedMax, For: time.Hour, Start: t0, Seed: 1})
		if err != nil {
			b.Fatal(err)
		}
		sink := &countSink{}
		if err := s.Run(context.Background(), sink); err != nil {
			b.Fatal(err)
		}
		msgs = sink.n
	}
	perOp := b.Elapsed().Seconds() / float64(b.N)
	b.ReportMetric(3600/perOp, "x_realtime")
	b.ReportMetric(float64(msgs), "msgs/op")
	reportCPU(b, cpu0)
}

// BenchmarkPhysicsHour: the model alone, one simulated hour of the generic
// story on 100 cells at 10 Hz.
func BenchmarkPhysicsHour(b *testing.B) {
	dm := loadMap(b, "testdata/pack100.toml")
	sc := GenericScenario(dm.Profile())
	cpu0 := processCPU()
	for b.Loop() {
		m, err := buildModel(dm.Profile(), sc, nil, 1)
		if err != nil {
			b.Fatal(err)
		}
		st := newStory(sc, m)
		for k := 0; k < 36000; k++ {
			st.tick(0.1)
		}
	}
	perOp := b.Elapsed().Seconds() / float64(b.N)
	b.ReportMetric(3600/perOp, "x_realtime")
	reportCPU(b, cpu0)
}

// reportCPU adds simulated time over CPU time (x_realtime_cpu): on a busy
// machine wall time overstates the cost. GC work on other threads counts too.
func reportCPU(b *testing.B, cpu0 float64) {
	if cpu := processCPU() - cpu0; cpu > 0 {
		b.ReportMetric(3600/(cpu/float64(b.N)), "x_realtime_cpu")
	}
}

// BenchmarkRunMaxBuoy: the example profile's frames and console lines
// generated at full speed (physics at 10 Hz), per message; the
// msgs/s figure compares with the ~8,000 frames/s of a saturated 1 Mbit/s
// bus (REFERENCES.md).
func BenchmarkRunMaxBuoy(b *testing.B) {
	dm := loadMap(b, buoyProfile)
	s, err := New(dm, Options{Speed: SpeedMax, Start: t0, Scenario: BuoyWinchScenario()})
	if err != nil {
		b.Fatal(err)
	}
	sink := &countSink{}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	b.ResetTimer()
	if err := s.Run(ctx, &stopAfter{countSink: sink, n: b.N, stop: cancel}); err != nil {
		b.Fatal(err)
	}
	b.ReportMetric(float64(sink.n)/b.Elapsed().Seconds(), "msgs/s")
}

// stopAfter cancels the run once n messages have arrived.
type stopAfter struct {
	*countSink
	n    int
	stop func()
}

func (s *stopAfter) Deliver(b []bus.Message) {
	s.countSink.Deliver(b)
	if s.countSink.n >= s.n {
		s.stop()
	}
}
