package check

import (
	"context"
	"fmt"
	"os"
	"testing"
	"time"

	"packwatch/config"
	"packwatch/decode"
	"packwatch/pack"
	"packwatch/sim"
)

// bigWindow is 60 one-second samples of a 96-cell pack with 32 sensors.
func bigWindow() Window {
	mk := func(msgs uint64) pack.PackSnapshot {
		p := healthyPack(msgs)
		p.Cells = p.Cells[:0]
		for i := 0; i < 96; i++ {
			p.Cells = append(p.Cells, pack.CellSnap{N: i + 1, V: np(3.85 + float64(i%7)*0.001), State: "ok"})
		}
		p.Temps = p.Temps[:0]
		for i := 0; i < 32; i++ {
			p.Temps = append(p.Temps, pack.TempSnap{N: i + 1, C: np(20 + float64(i%5)), Role: "cell", State: "ok"})
		}
		return p
	}
	start := mk(0)
	w := Window{From: t0, To: t0 + 60e9, Start: &start}
	for i := 1; i <= 60; i++ {
		w.Samples = append(w.Samples, Sample{T: t0 + int64(i)*1e9, Pack: mk(uint64(i) * 100)})
	}
	return w
}

// BenchmarkEvaluate: every rule over a 60 s window of a 96-cell pack.
func BenchmarkEvaluate(b *testing.B) {
	w, s := bigWindow(), testSettings()
	b.ReportAllocs()
	for b.Loop() {
		Evaluate(w, s)
	}
}

// BenchmarkRunCapture: a 5-minute simulated capture of the pod read whole
// through the collector and the engine; reports messages per second.
func BenchmarkRunCapture(b *testing.B) {
	p, err := loadPodB()
	if err != nil {
		b.Fatal(err)
	}
	m := p.m
	s, err := sim.New(m, sim.Options{Speed: sim.SpeedMax, Scenario: restScenario(), Start: simStart, Seed: 7, For: 5 * time.Minute})
	if err != nil {
		b.Fatal(err)
	}
	sink := &captureSink{names: SourceNames(p.p), start: simStart.UnixNano()}
	sink.buf = append(sink.buf, "# start "+simStart.Format(time.RFC3339)+"\n"...)
	if err := s.Run(context.Background(), sink); err != nil {
		b.Fatal(err)
	}
	path := b.TempDir() + "/bench.capture"
	if err := writeFile(path, sink.buf); err != nil {
		b.Fatal(err)
	}
	var n int
	b.ReportAllocs()
	for b.Loop() {
		eng := pack.NewEngine(pack.Options{})
		if err := eng.AddPack("pod", m, nil); err != nil {
			b.Fatal(err)
		}
		_, raw, _, err := RunCapture(context.Background(), eng, "pod", p.p, path, 0, nil)
		if err != nil {
			b.Fatal(err)
		}
		n = raw.Messages
	}
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "msgs/s")
	if n == 0 {
		b.Fatal(fmt.Errorf("no messages"))
	}
}

type podB struct {
	p *config.Profile
	m *decode.Map
}

func loadPodB() (podB, error) {
	p, err := config.Load("testdata/pod.toml")
	if err != nil {
		return podB{}, err
	}
	m, err := decode.Compile(p)
	return podB{p, m}, err
}

func writeFile(path string, b []byte) error { return os.WriteFile(path, b, 0o644) }
