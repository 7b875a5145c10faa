package metrics

import (
	"fmt"
	"io"
	"net/http/httptest"
	"sync"
	"testing"
	"time"

	"packwatch/pack"
)

// bigSnapshot widens the two packs of a real snapshot to n packs of 96
// cells (a 350 V string of EV-grade modules), for sizing.
func bigSnapshot(s *pack.Snapshot, n int) *pack.Snapshot {
	out := *s
	out.Packs = nil
	for i := 0; i < n; i++ {
		p := s.Packs[i%len(s.Packs)]
		p.ID = fmt.Sprintf("pack%d", i+1)
		cells := make([]pack.CellSnap, 96)
		for c := range cells {
			cells[c] = p.Cells[c%len(p.Cells)]
			cells[c].N = c + 1
		}
		p.Cells = cells
		out.Packs = append(out.Packs, p)
	}
	return &out
}

func benchSnapshots(b *testing.B) map[string]*pack.Snapshot {
	r := newRig(b, nil)
	r.run(5*time.Second, nil)
	return map[string]*pack.Snapshot{
		"packs=2,cells=12": r.last,
		"packs=8,cells=96": bigSnapshot(r.last, 8),
	}
}

// reportCPU reports the process's CPU time per op since cpu0 (GC
// included), steadier than wall time on a shared machine.
func reportCPU(b *testing.B, cpu0 int64) {
	if cpu0 < 0 || b.N == 0 {
		return
	}
	b.ReportMetric(float64(cpuTimeNs()-cpu0)/float64(b.N), "cpu-ns/op")
}

// BenchmarkObserve is the cost the hub pays at every tick (10 Hz), with two
// scrapers' windows open.
func BenchmarkObserve(b *testing.B) {
	for name, s := range benchSnapshots(b) {
		b.Run(name, func(b *testing.B) {
			h := NewHandler(Options{})
			h.Observe(s)
			h.take("prometheus-1")
			h.take("prometheus-2")
			b.ReportAllocs()
			cpu0 := cpuTimeNs()
			for b.Loop() {
				h.Observe(s)
			}
			reportCPU(b, cpu0)
		})
	}
}

// BenchmarkScrape is one whole GET /metrics in the text format.
func BenchmarkScrape(b *testing.B) {
	for name, s := range benchSnapshots(b) {
		b.Run(name, func(b *testing.B) {
			h := NewHandler(Options{})
			h.Observe(s)
			req := httptest.NewRequest("GET", "/metrics", nil)
			req.Header.Set("User-Agent", promUA)
			b.ReportAllocs()
			var size int
			cpu0 := cpuTimeNs()
			for b.Loop() {
				rec := httptest.NewRecorder()
				h.ServeHTTP(rec, req)
				size = rec.Body.Len()
				io.Copy(io.Discard, rec.Body)
			}
			reportCPU(b, cpu0)
			b.ReportMetric(float64(size), "bytes/scrape")
		})
	}
}

// Observe from the hub and scrapes from several clients at once (run with
// -race).
func TestConcurrentObserveAndScrape(t *testing.T) {
	h := NewHandler(Options{})
	r := newRig(t, nil)
	r.run(2*time.Second, nil)
	snaps := []*pack.Snapshot{r.last}
	for i := 0; i < 20; i++ {
		r.run(100*time.Millisecond, nil)
		snaps = append(snaps, r.last)
	}
	var wg sync.WaitGroup
	wg.Go(func() {
		for _, s := range snaps {
			h.Observe(s)
		}
	})
	for c := 0; c < 3; c++ {
		wg.Go(func() {
			for i := 0; i < 10; i++ {
				req := httptest.NewRequest("GET", "/metrics", nil)
				req.Header.Set("User-Agent", fmt.Sprintf("scraper-%d", c))
				rec := httptest.NewRecorder()
				h.ServeHTTP(rec, req)
				if rec.Code != 200 {
					t.Errorf("scrape: %d", rec.Code)
				}
			}
		})
	}
	wg.Wait()
	x := scrape(t, h, "scraper-0")
	if v, ok := x.find(t, "packwatch_snapshots_total"); !ok || v != float64(snaps[len(snaps)-1].Seq) {
		t.Errorf("after all observed: snapshots_total %v, want %d", v, snaps[len(snaps)-1].Seq)
	}
}
