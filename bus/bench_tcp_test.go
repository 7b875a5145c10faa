//go:build unix

package bus_test

import (
	"bufio"
	"context"
	"fmt"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
)

// The load generator runs as a child process (this test binary re-run with
// writerEnv set to "RATE,SECONDS"): it listens, prints its address, waits
// for the source to connect and writes 16-byte frames at RATE frames/s in
// 1 ms slices, as a gateway forwarding a busy bus would.
const writerEnv = "PACKWATCH_BUS_TCP_WRITER"

func tcpWriterChild() int {
	parts := strings.Split(os.Getenv(writerEnv), ",")
	rate, _ := strconv.Atoi(parts[0])
	secs, _ := strconv.ParseFloat(parts[1], 64)
	srv, err := bus.ListenTCPCAN("127.0.0.1:0")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		return 2
	}
	defer srv.Close()
	fmt.Println(srv.Addr())
	for srv.Clients() == 0 {
		time.Sleep(time.Millisecond)
	}
	tick := time.NewTicker(time.Millisecond)
	defer tick.Stop()
	start := time.Now()
	sent := 0
	var batch []can.Frame
	for {
		el := time.Since(start)
		if el.Seconds() >= secs {
			return 0
		}
		due := int(el.Seconds() * float64(rate))
		batch = batch[:0]
		for ; sent < due; sent++ {
			f := can.Frame{ID: 0x4C0 + uint32(sent%8), Length: 8}
			f.Data[0] = byte(sent)
			batch = append(batch, f)
		}
		if len(batch) > 0 && srv.WriteFrames(batch) == 0 {
			return 0
		}
		<-tick.C
	}
}

type countSink struct{ n atomic.Int64 }

func (c *countSink) Deliver(b []bus.Message) { c.n.Add(int64(len(b))) }
func (c *countSink) Status(bus.Status)       {}

func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// measureTCPCAN runs a tcp-can source against a child writing rate frames/s
// and returns the CPU share of one core this process used and the frames/s
// it received over a 3 s window.
func measureTCPCAN(b *testing.B, rate int, batchWait time.Duration) (cpu, fps float64) {
	const window = 3 * time.Second
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), fmt.Sprintf("%s=%d,%f", writerEnv, rate, (window+2*time.Second).Seconds()))
	cmd.Stderr = os.Stderr
	out, err := cmd.StdoutPipe()
	if err != nil {
		b.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		b.Fatal(err)
	}
	defer cmd.Wait()
	defer cmd.Process.Kill()
	addr, err := bufio.NewReader(out).ReadString('\n')
	if err != nil {
		b.Fatal(err)
	}
	spec := bus.Spec{Kind: bus.KindTCPCAN, Device: strings.TrimSpace(addr), BatchWait: batchWait}
	src, err := bus.Open(spec)
	if err != nil {
		b.Fatal(err)
	}
	sink := &countSink{}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx, sink) }()
	defer func() { cancel(); <-done }()
	if rate > 0 {
		for sink.n.Load() == 0 {
			time.Sleep(time.Millisecond)
		}
	} else {
		time.Sleep(500 * time.Millisecond) // connected and idle
	}
	time.Sleep(500 * time.Millisecond) // past the start-up
	c0, n0, t0 := cpuTime(), sink.n.Load(), time.Now()
	time.Sleep(window)
	c1, n1, t1 := cpuTime(), sink.n.Load(), time.Now()
	wall := t1.Sub(t0).Seconds()
	return 100 * (c1 - c0).Seconds() / wall, float64(n1-n0) / wall
}

// BenchmarkTCPCANSource8k: a tcp-can source at 8,000 frames/s (a saturated
// 1 Mbit/s bus) from another process. Goal: under 8 % of one core.
func BenchmarkTCPCANSource8k(b *testing.B) {
	for _, tc := range []struct {
		name string
		wait time.Duration
	}{{"batched-3ms", 3 * time.Millisecond}, {"batched-5ms", 5 * time.Millisecond}, {"unbatched", -1}} {
		b.Run(tc.name, func(b *testing.B) {
			var cpu, fps float64
			for i := 0; i < b.N; i++ {
				cpu, fps = measureTCPCAN(b, 8000, tc.wait)
			}
			b.ReportMetric(cpu, "%cpu")
			b.ReportMetric(fps, "frames/s")
		})
	}
}

// BenchmarkTCPCANSourceIdle: a connected source with no traffic. Goal ≈ 0.
func BenchmarkTCPCANSourceIdle(b *testing.B) {
	var cpu float64
	for i := 0; i < b.N; i++ {
		cpu, _ = measureTCPCAN(b, 0, 0)
	}
	b.ReportMetric(cpu, "%cpu")
}
