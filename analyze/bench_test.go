package analyze

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"testing"

	"packwatch/analyze/synthtest"
	"packwatch/bus"
	"packwatch/record"
)

// hourBatches makes one hour of a 4-cell string at 1,000 frames/s (3.6 M
// frames): a rest, a 1 C discharge with a 20 s 3 C step every 5 minutes, a
// rest, and a C/2 charge, in batches of 4,096 as a recording's blocks.
func hourBatches(b *testing.B) [][]bus.Message {
	b.Helper()
	var out [][]bus.Message
	p := synthtest.New(4, 20, 0.002, 0.001, 20000, synthtest.KneeOCV(), 0.95)
	p.Fast = true
	p.Emit = func(batch []bus.Message) { out = append(out, append([]bus.Message(nil), batch...)) }
	p.Hold(0, 120)
	for k := 0; k < 6; k++ {
		p.Hold(-20, 280)
		p.Hold(-60, 20)
	}
	p.Hold(0, 180)
	p.Hold(10, 3600-p.T())
	p.Flush()
	return out
}

func countMsgs(bs [][]bus.Message) int {
	n := 0
	for _, b := range bs {
		n += len(b)
	}
	return n
}

// analyzeBatches decodes and analyses batches: what "report" does after
// reading.
func analyzeBatches(b *testing.B, bs [][]bus.Message, total int) *Report {
	m := compile(b, "testdata/string4.toml")
	c := NewCollector(m)
	for k, batch := range bs {
		c.Add(batch)
		if k == 2 {
			c.Grow(total - c.Messages())
		}
	}
	return Analyze(c.Session(), Options{})
}

// BenchmarkAnalyzeHour: one hour at 1,000 frames/s decoded from the raw
// messages and analysed (segments, curves, steps, ICA, bursts, imbalance).
func BenchmarkAnalyzeHour(b *testing.B) {
	bs := hourBatches(b)
	total := countMsgs(bs)
	b.ReportAllocs()
	runtime.GC() // the setup's garbage is not the benchmark's
	b.ResetTimer()
	var rep *Report
	c0 := cpuTime()
	for i := 0; i < b.N; i++ {
		rep = analyzeBatches(b, bs, total)
	}
	b.StopTimer()
	b.ReportMetric(float64(cpuTime()-c0)/float64(b.N), "cpu-ns/op")
	b.ReportMetric(float64(total), "frames/op")
	if len(rep.Pulses) < 6 || len(rep.Segments) < 4 {
		b.Fatalf("analysis found %d steps, %d segments", len(rep.Pulses), len(rep.Segments))
	}
}

// BenchmarkAnalyzeHourStages splits the time between decoding into traces
// and the analysis itself.
func BenchmarkAnalyzeHourStages(b *testing.B) {
	bs := hourBatches(b)
	total := countMsgs(bs)
	m := compile(b, "testdata/string4.toml")
	runtime.GC()
	b.Run("decode", func(b *testing.B) {
		c0 := cpuTime()
		defer func() { b.ReportMetric(float64(cpuTime()-c0)/float64(b.N), "cpu-ns/op") }()
		for i := 0; i < b.N; i++ {
			c := NewCollector(m)
			for k, batch := range bs {
				c.Add(batch)
				if k == 2 {
					c.Grow(total - c.Messages())
				}
			}
			c.Session()
		}
	})
	c := NewCollector(m)
	for _, batch := range bs {
		c.Add(batch)
	}
	s := c.Session()
	runtime.GC()
	b.Run("analyze", func(b *testing.B) {
		c0 := cpuTime()
		defer func() { b.ReportMetric(float64(cpuTime()-c0)/float64(b.N), "cpu-ns/op") }()
		for i := 0; i < b.N; i++ {
			Analyze(s, Options{})
		}
	})
}

// hourRecording writes the hour into a recording once per benchmark.
func hourRecording(b *testing.B) (string, int) {
	b.Helper()
	bs := hourBatches(b)
	path := filepath.Join(b.TempDir(), "hour.db")
	w, err := record.Create(path, record.Meta{Tool: "packwatch", Mode: "simulated"}, record.Options{Lossless: true})
	if err != nil {
		b.Fatal(err)
	}
	text, err := os.ReadFile("testdata/string4.toml")
	if err != nil {
		b.Fatal(err)
	}
	w.Profile(bs[0][0].T, "string4.toml", string(text), "")
	for _, batch := range bs {
		w.Write(batch)
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	return path, countMsgs(bs)
}

// BenchmarkScanHourRecording is the plain raw scan of the hour's recording:
// every message read back, nothing decoded (the baseline of the ratio).
func BenchmarkScanHourRecording(b *testing.B) {
	path, total := hourRecording(b)
	r, err := record.Open(path)
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	runtime.GC() // the setup's garbage is not the benchmark's
	b.ResetTimer()
	c0 := cpuTime()
	defer func() { b.ReportMetric(float64(cpuTime()-c0)/float64(b.N), "cpu-ns/op") }()
	for i := 0; i < b.N; i++ {
		n := 0
		if err := r.Scan(context.Background(), math.MinInt64, math.MaxInt64, func(batch []bus.Message) error {
			n += len(batch)
			return nil
		}); err != nil {
			b.Fatal(err)
		}
		if n != total {
			b.Fatalf("scanned %d of %d", n, total)
		}
	}
	b.ReportMetric(float64(total), "frames/op")
}

// BenchmarkAnalyzeHourRecording reads the hour's recording and analyses it,
// as "packwatch report FILE.db" does.
func BenchmarkAnalyzeHourRecording(b *testing.B) {
	path, total := hourRecording(b)
	r, err := record.Open(path)
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	m := compile(b, "testdata/string4.toml")
	runtime.GC() // the setup's garbage is not the benchmark's
	b.ResetTimer()
	c0 := cpuTime()
	defer func() { b.ReportMetric(float64(cpuTime()-c0)/float64(b.N), "cpu-ns/op") }()
	for i := 0; i < b.N; i++ {
		c := NewCollector(m)
		if err := r.Scan(context.Background(), math.MinInt64, math.MaxInt64, func(batch []bus.Message) error {
			c.Add(batch)
			if c.Messages() == len(batch) {
				c.Grow(total)
			}
			return nil
		}); err != nil {
			b.Fatal(err)
		}
		Analyze(c.Session(), Options{})
	}
	b.ReportMetric(float64(total), "frames/op")
}
