// Command pwload measures packwatch end to end on loopback: a separate
// process sends a saturated bus (packwatch simulate --rate N --to tcp-can:…)
// into `packwatch serve` with recording on, while websocket clients watch the
// page's stream. It reports the serve process's CPU share of one core and the
// frame-to-client latency: for every snapshot, the frames it shows first
// arrived between the previous snapshot's newest data time and its own (live
// data time is wall time); their latency is the client's receive time minus
// their arrival, which includes the wait for the next tick.
//
//	go build -o /tmp/packwatch ./cmd/packwatch
//	go run ./cmd/pwload --packwatch /tmp/packwatch --rate 8000 --clients 20 --for 30s
//
// Linux only (it reads /proc for CPU time). Everything runs on 127.0.0.1.
package main

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/gorilla/websocket"
)

func main() {
	bin := flag.String("packwatch", "packwatch", "path of the packwatch binary")
	rate := flag.Int("rate", 8000, "frames per second sent by the simulator")
	clients := flag.Int("clients", 20, "websocket clients")
	dur := flag.Duration("for", 30*time.Second, "measurement time (after 5 s of warm-up)")
	flag.Parse()
	if err := run(*bin, *rate, *clients, *dur); err != nil {
		fmt.Fprintln(os.Stderr, "pwload:", err)
		os.Exit(2)
	}
}

func freePort() (int, error) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return 0, err
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port, nil
}

const profileTmpl = `[pack]
name = "Load test pack"
cells = 12
temp_sensors = 3
capacity_ah = 180
[limits]
cell_high_v = 4.25
cell_low_v = 3.00
[[source]]
name = "gw"
kind = "tcp-can"
device = "127.0.0.1:%d"
bitrate = 1000000
[[frame]]
id = 0x4C0
mux = { byte = 0 }
period_ms = 100
  [[frame.field]]
  mux = "0..3"
  bind = "cell[{3*mux+1}..{3*mux+3}].voltage"
  byte = 1
  size = 2
  scale = 0.001
[[frame]]
id = 0x4D0
period_ms = 50
  [[frame.field]]
  bind = "pack.current"
  byte = 0
  size = 2
  order = "big"
  signed = true
  scale = 0.1
  [[frame.field]]
  bind = "pack.voltage"
  byte = 2
  size = 2
  order = "big"
  scale = 0.01
[[frame]]
id = 0x4E0
period_ms = 500
  [[frame.field]]
  bind = "temp[1..3]"
  byte = 0
  size = 1
  offset = -40
`

func run(bin string, rate, nclients int, dur time.Duration) error {
	dir, err := os.MkdirTemp("", "pwload")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	gwPort, err := freePort()
	if err != nil {
		return err
	}
	webPort, err := freePort()
	if err != nil {
		return err
	}
	prof := filepath.Join(dir, "load.toml")
	if err := os.WriteFile(prof, fmt.Appendf(nil, profileTmpl, gwPort), 0o644); err != nil {
		return err
	}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	simc := exec.CommandContext(ctx, bin, "simulate", "--profile", prof, "--to", fmt.Sprintf("tcp-can:127.0.0.1:%d", gwPort), "--rate", strconv.Itoa(rate), "--speed", "1")
	simc.Stderr = os.Stderr
	if err := simc.Start(); err != nil {
		return fmt.Errorf("start simulate: %w", err)
	}
	srvc := exec.CommandContext(ctx, bin, "serve", "--profile", prof, "--addr", fmt.Sprintf("127.0.0.1:%d", webPort), "--record", filepath.Join(dir, "load.db"))
	srvc.Stderr = os.Stderr
	if err := srvc.Start(); err != nil {
		return fmt.Errorf("start serve: %w", err)
	}
	defer func() { cancel(); simc.Wait(); srvc.Wait() }()
	base := fmt.Sprintf("http://127.0.0.1:%d", webPort)
	// wait until frames flow
	deadline := time.Now().Add(30 * time.Second)
	for {
		if time.Now().After(deadline) {
			return fmt.Errorf("no data reached serve within 30 s")
		}
		if n := messages(base); n > 0 {
			break
		}
		time.Sleep(100 * time.Millisecond)
	}
	var mu sync.Mutex
	var lat []float64
	measuring := false
	var wg sync.WaitGroup
	for i := 0; i < nclients; i++ {
		h := http.Header{"Origin": {base}}
		c, _, err := websocket.DefaultDialer.Dial(fmt.Sprintf("ws://127.0.0.1:%d/ws", webPort), h)
		if err != nil {
			return fmt.Errorf("websocket: %w", err)
		}
		wg.Add(1)
		go func() {
			defer wg.Done()
			defer c.Close()
			prev := 0.0
			for {
				_, b, err := c.ReadMessage()
				if err != nil {
					return
				}
				now := time.Now()
				var env struct {
					Type string `json:"type"`
					Data struct {
						DataT float64 `json:"data_t"`
					} `json:"data"`
				}
				if json.Unmarshal(b, &env) != nil || env.Type != "snapshot" || env.Data.DataT == 0 {
					continue
				}
				// The frames first shown by this snapshot arrived between
				// the previous snapshot's newest data time and this one's:
				// spread ten sample frames evenly over that interval.
				recv, d := float64(now.UnixNano())/1e9, env.Data.DataT
				mu.Lock()
				if measuring && prev > 0 && d > prev {
					for j := 0; j < 10; j++ {
						tf := prev + (float64(j)+0.5)/10*(d-prev)
						lat = append(lat, (recv-tf)*1000)
					}
				}
				mu.Unlock()
				prev = max(prev, d)
			}
		}()
	}
	time.Sleep(5 * time.Second) // warm-up
	m0, cpu0, t0 := messages(base), cpuTime(srvc.Process.Pid), time.Now()
	mu.Lock()
	measuring = true
	mu.Unlock()
	time.Sleep(dur)
	mu.Lock()
	measuring = false
	got := slices.Clone(lat)
	mu.Unlock()
	m1, cpu1, t1 := messages(base), cpuTime(srvc.Process.Pid), time.Now()
	wall := t1.Sub(t0).Seconds()
	slices.Sort(got)
	pct := func(p float64) float64 {
		if len(got) == 0 {
			return 0
		}
		return got[min(len(got)-1, int(p*float64(len(got))))]
	}
	fmt.Printf("frames in: %.0f/s (asked %d/s); websocket clients: %d; recording on\n", float64(m1-m0)/wall, rate, nclients)
	fmt.Printf("serve CPU: %.1f %% of one core over %.0f s\n", 100*(cpu1-cpu0)/wall, wall)
	fmt.Printf("frame-to-client latency: p50 %.1f ms, p99 %.1f ms, max %.1f ms (%d samples, 10 per snapshot per client)\n", pct(0.5), pct(0.99), pct(1), len(got))
	cancel()
	wg.Wait()
	return nil
}

// messages is the total of messages over the sources in /api/state.
func messages(base string) uint64 {
	resp, err := http.Get(base + "/api/state")
	if err != nil {
		return 0
	}
	defer resp.Body.Close()
	var s struct {
		Packs []struct {
			Sources []struct {
				Messages uint64 `json:"messages"`
			} `json:"sources"`
		} `json:"packs"`
	}
	json.NewDecoder(resp.Body).Decode(&s)
	var n uint64
	for _, p := range s.Packs {
		for _, src := range p.Sources {
			n += src.Messages
		}
	}
	return n
}

// cpuTime is a process's user+system CPU seconds from /proc/PID/stat.
func cpuTime(pid int) float64 {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if err != nil {
		return 0
	}
	s := string(b)
	f := strings.Fields(s[strings.LastIndexByte(s, ')')+2:])
	ut, _ := strconv.ParseFloat(f[11], 64)
	st, _ := strconv.ParseFloat(f[12], 64)
	return (ut + st) / 100 // USER_HZ is 100 on Linux
}
