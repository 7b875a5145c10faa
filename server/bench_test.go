package server

import (
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"packwatch/pack"
)

// constEngine returns one fixed snapshot with a new seq each call, so a
// benchmark measures the hub, not the engine.
type constEngine struct {
	mu   sync.Mutex
	base pack.Snapshot
}

func (e *constEngine) Snapshot(now time.Time) *pack.Snapshot {
	e.mu.Lock()
	defer e.mu.Unlock()
	s := e.base
	e.base.Seq++
	e.base.DataT += 0.1
	s.ServerTime = now.UTC().Format(time.RFC3339Nano)
	return &s
}

func (e *constEngine) Ack(string, uint64) error { return nil }

func newConstEngine(cells int) *constEngine {
	f := newFakeEngine(cells, 16)
	s := f.Snapshot(time.Now())
	return &constEngine{base: *s}
}

// cpuTime is the process's user plus system CPU time. On a shared machine
// wall time per op measures the neighbours; CPU time measures us.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// reportCPU adds CPU ns per op and the share of one core at 10 ticks/s.
func reportCPU(b *testing.B, from time.Duration) {
	per := float64(cpuTime()-from) / float64(b.N)
	b.ReportMetric(per, "cpu-ns/op")
	b.ReportMetric(per*10/1e9*100, "%core@10Hz")
}

// BenchmarkHubFanout: one tick of a 100-cell snapshot fanned out to 50
// websocket clients over loopback; each op waits until every client has
// read that snapshot. cpu-ns/op is the process's CPU per tick: hub, 50
// writers and the 50 in-process test clients' reads (which only peek at the
// seq); %core@10Hz is that at 10 ticks a second.
func BenchmarkHubFanout(b *testing.B) {
	const clients = 50
	eng := newConstEngine(100)
	rs := startServer(b, Options{Engine: eng, Tick: time.Hour})
	waitFor(b, "first tick", 10*time.Second, func() bool { return rs.s.hub.latest.Load() != nil })
	var target atomic.Uint64
	var got atomic.Int64
	all := make(chan struct{}, 1)
	onSnap := func(seq uint64) {
		if seq == target.Load() && got.Add(1) == clients {
			all <- struct{}{}
		}
	}
	var rd []*reader
	for range clients {
		c, _, err := dialWS(b, rs.base, nil, nil)
		if err != nil {
			b.Fatal(err)
		}
		rd = append(rd, startReaderHook(c, onSnap))
	}
	defer func() {
		for _, r := range rd {
			r.close()
		}
	}()
	waitFor(b, "clients registered", 10*time.Second, func() bool { return rs.s.hub.count() == clients })
	size := len(rs.s.hub.latest.Load().json)
	b.ReportAllocs()
	cpu0 := cpuTime()
	for b.Loop() {
		eng.mu.Lock()
		next := eng.base.Seq
		eng.mu.Unlock()
		got.Store(0)
		target.Store(next)
		rs.s.hub.tick(time.Now())
		<-all // every client has read this snapshot
	}
	reportCPU(b, cpu0)
	b.ReportMetric(float64(size), "bytes/snapshot")
}

// BenchmarkHubTick: the hub goroutine's own work per tick (snapshot call,
// one marshal, one prepared message, 50 mailbox offers), without waiting
// for the clients.
func BenchmarkHubTick(b *testing.B) {
	eng := newConstEngine(100)
	s, err := New(Options{Engine: eng, Listener: loopListener(b)})
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	var cs []*client
	for range 50 {
		c := newClient(s.hub, nil)
		s.hub.clients[c] = struct{}{}
		cs = append(cs, c)
	}
	var sink atomic.Int64
	b.ReportAllocs()
	cpu0 := cpuTime()
	for b.Loop() {
		s.hub.tick(time.Now())
	}
	reportCPU(b, cpu0)
	for _, c := range cs {
		if m := <-c.snap; m != nil {
			sink.Add(1)
		}
	}
	if sink.Load() != 50 {
		b.Fatalf("%d of 50 clients had the latest snapshot", sink.Load())
	}
}
