package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
	"packwatch/check"
	"packwatch/config"
	"packwatch/decode"
	"packwatch/record"
	"packwatch/sim"
)

func runCheckCLI(t *testing.T, hist string, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	args = append(args, "--history", hist)
	code := runCheck(context.Background(), args, &out, &errb)
	return code, out.String(), errb.String()
}

type checkCaptureSink struct {
	names []string
	start int64
	buf   []byte
}

func (c *checkCaptureSink) Deliver(batch []bus.Message) {
	for i := range batch {
		c.buf = bus.AppendCapture(c.buf, &batch[i], c.start, c.names[batch[i].Src])
	}
}

func (c *checkCaptureSink) Status(bus.Status) {}

// simCheckCapture writes a capture of the simulator running the profile's
// scenario (nil: the generic one) for d with the faults.
func simCheckCapture(t *testing.T, profile string, sc *sim.Scenario, d time.Duration, faults ...sim.Fault) string {
	t.Helper()
	p, err := config.Load(profile)
	if err != nil {
		t.Fatal(err)
	}
	m, err := decode.Compile(p)
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2026, 5, 1, 8, 0, 0, 0, time.UTC)
	s, err := sim.New(m, sim.Options{Speed: sim.SpeedMax, Scenario: sc, Faults: faults, Start: start, Seed: 3, For: d})
	if err != nil {
		t.Fatal(err)
	}
	sink := &checkCaptureSink{names: check.SourceNames(p), start: start.UnixNano()}
	sink.buf = append(sink.buf, "# start "+start.Format(time.RFC3339)+"\n"...)
	if err := s.Run(context.Background(), sink); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "sim.capture")
	if err := os.WriteFile(path, sink.buf, 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

const checkExampleProfile = "../../config/examples/buoy-winch.toml"

// The demo's pack (the example profile with its own story, resting at the
// start): healthy is a go (exit 0); each fault a no-go (exit 1) naming the
// rule in the table.
func TestCheckDemoScenarios(t *testing.T) {
	cases := []struct {
		name   string
		faults []sim.Fault
		code   int
		want   string
	}{
		{"healthy", nil, exitOK, "PRE-FLIGHT CHECK: GO"},
		{"weak cell", []sim.Fault{{Kind: sim.FaultWeakCell, N: 7}}, exitNegative, "FAIL         Cell spread"},
		{"hot sensor", []sim.Fault{{Kind: sim.FaultHotSensor}}, exitNegative, "FAIL         Temperature window"},
		{"fault flag", []sim.Fault{{Kind: sim.FaultFlag, After: 5 * time.Second}}, exitNegative, `bms.state "fault"`},
		{"low soc", []sim.Fault{{Kind: sim.FaultLowSOC}}, exitNegative, "FAIL         State of charge"},
		{"silent console", []sim.Fault{{Kind: sim.FaultSilent, Source: "console", After: 20 * time.Second}}, exitNegative, "source console sent nothing"},
	}
	hist := filepath.Join(t.TempDir(), "checks.db")
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			capture := simCheckCapture(t, checkExampleProfile, sim.BuoyWinchScenario(), 40*time.Second, c.faults...)
			code, out, errOut := runCheckCLI(t, hist, "--profile", checkExampleProfile, "--input", capture, "--for", "10s", "--operator", "test")
			if code != c.code || !strings.Contains(out, c.want) || !strings.Contains(out, "FROM A CAPTURE, NOT LIVE") {
				t.Errorf("exit %d, want %d with %q\n%s%s", code, c.code, c.want, out, errOut)
			}
		})
	}
	code, out, _ := runCheckCLI(t, hist, "--verify")
	if code != exitOK || !strings.Contains(out, "6 record(s), chain intact") {
		t.Errorf("verify: %d %s", code, out)
	}
}

func TestCheckCLI(t *testing.T) {
	dir := t.TempDir()
	hist := filepath.Join(dir, "checks.db")
	pod := "../../check/testdata/pod.toml"
	capture := simCheckCapture(t, pod, nil, 30*time.Second)

	// The checklist must be confirmed for a go.
	code, out, errOut := runCheckCLI(t, hist, "--profile", pod, "--input", capture, "--for", "10s")
	if code != exitNegative || !strings.Contains(out, "NOT CONFIRMED") && !strings.Contains(out, "not confirmed") {
		t.Errorf("unconfirmed: exit %d\n%s%s", code, out, errOut)
	}
	jsonOut := filepath.Join(dir, "r.json")
	htmlOut := filepath.Join(dir, "r.html")
	code, out, errOut = runCheckCLI(t, hist, "--profile", pod, "--input", capture, "--for", "10s", "--confirm", "all",
		"--operator", "A. Operator", "--json", "-o", htmlOut)
	if code != exitOK {
		t.Fatalf("confirmed: exit %d\n%s%s", code, out, errOut)
	}
	var rec check.Record
	if err := json.Unmarshal([]byte(out), &rec); err != nil {
		t.Fatalf("--json: %v\n%s", err, out)
	}
	if rec.Verdict != check.VerdictGo || rec.Pack.Serial != "POD-0007" || rec.Changes == nil || rec.Hash == "" || rec.Operator != "A. Operator" {
		t.Errorf("record %+v", rec)
	}
	html, err := os.ReadFile(htmlOut)
	if err != nil || !strings.Contains(string(html), "PRE-FLIGHT CHECK: GO") || !strings.Contains(string(html), "@media print") {
		t.Errorf("html: %v", err)
	}
	// --show prints a stored record; -o .json exports it.
	code, out, _ = runCheckCLI(t, hist, "--show", rec.Hash[:12], "-o", jsonOut)
	if code != exitOK || !strings.Contains(out, rec.Hash) {
		t.Errorf("show: %d\n%s", code, out)
	}
	b, err := os.ReadFile(jsonOut)
	if err != nil {
		t.Fatal(err)
	}
	back, err := check.ParseRecord(b)
	if err != nil || back.VerifyHash() != nil {
		t.Errorf("exported record: %v", err)
	}
	code, out, _ = runCheckCLI(t, hist, "--list", "--pack-id", "POD-0007")
	if code != exitOK || strings.Count(out, "\n") != 2 {
		t.Errorf("list: %d\n%s", code, out)
	}

	// Could not check: no message in the capture, a bad profile, bad flags.
	empty := filepath.Join(dir, "empty.capture")
	os.WriteFile(empty, []byte("# start 2026-05-01T08:00:00Z\n"), 0o644)
	for _, args := range [][]string{
		{"--profile", pod, "--input", empty},
		{"--profile", "testdata/none.toml", "--input", capture},
		{"--profile", pod, "--input", capture, "--confirm", "3"},
		{"--profile", pod, "--input", capture, "--replay", "x.db"},
		{"--profile", pod, "--input", capture, "-o", filepath.Join(dir, "r.txt")},
	} {
		if code, out, errOut := runCheckCLI(t, hist, args...); code != exitBad {
			t.Errorf("%v: exit %d, want 2\n%s%s", args, code, out, errOut)
		}
	}
}

// A recording of the pod (made by the simulator) checked with --replay: the
// last 10 s, a go with the checklist confirmed; the report says it is a replay.
func TestCheckReplay(t *testing.T) {
	dir := t.TempDir()
	pod := "../../check/testdata/pod.toml"
	p, err := config.Load(pod)
	if err != nil {
		t.Fatal(err)
	}
	m, err := decode.Compile(p)
	if err != nil {
		t.Fatal(err)
	}
	start := time.Date(2026, 5, 1, 8, 0, 0, 0, time.UTC)
	meta := record.Meta{Tool: "packwatch", Version: "test", Start: start, Mode: "simulated",
		Sources: []record.SourceInfo{{Index: 0, Name: "bms", Kind: "socketcan"}, {Index: 1, Name: "console", Kind: "serial-text"}}}
	recPath := filepath.Join(dir, "pod.db")
	w, err := record.Create(recPath, meta, record.Options{Lossless: true})
	if err != nil {
		t.Fatal(err)
	}
	s, err := sim.New(m, sim.Options{Speed: sim.SpeedMax, Start: start, Seed: 3, For: 30 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	if err := s.Run(context.Background(), recordSink{w}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	code, out, errOut := runCheckCLI(t, filepath.Join(dir, "checks.db"), "--profile", pod, "--replay", recPath, "--for", "10s", "--confirm", "all", "--json")
	if code != exitOK {
		t.Fatalf("exit %d\n%s%s", code, out, errOut)
	}
	var rec check.Record
	if err := json.Unmarshal([]byte(out), &rec); err != nil {
		t.Fatal(err)
	}
	if rec.Data.Mode != check.ModeReplay || !rec.Data.Simulated || !strings.Contains(rec.Data.Notice, "FROM A RECORDING, NOT LIVE, SIMULATED DATA") ||
		rec.Data.Seconds != 10 || rec.Raw.Messages < 300 {
		t.Errorf("data %+v raw %d", rec.Data, rec.Raw.Messages)
	}
}

type recordSink struct{ w *record.Writer }

func (r recordSink) Deliver(b []bus.Message) { r.w.Write(b) }
func (r recordSink) Status(bus.Status)       {}

// liveProfile is an invented 4-cell pack read from a tcp-can gateway at addr.
const liveProfile = `
[pack]
name = "Bench pod"
cells = 4
temp_sensors = 1
capacity_ah = 20
serial = "BENCH-1"

[limits]
cell_high_v = 4.20
cell_low_v = 3.00
temp_high_c = 55
temp_low_c = -10

[check]
min_soc_pct = 30

[[source]]
name = "gw"
kind = "tcp-can"
device = "%s"

[[frame]]
id = 0x310
mux = { byte = 0 }
period_ms = 50
  [[frame.field]]
  mux = "0..1"
  bind = "cell[{2*mux+1}..{2*mux+2}].voltage"
  byte = 1
  size = 2
  scale = 0.001

[[frame]]
id = 0x320
period_ms = 100
  [[frame.field]]
  bind = "pack.current"
  byte = 0
  size = 2
  signed = true
  scale = 0.1
  [[frame.field]]
  bind = "pack.soc"
  byte = 2
  size = 1
  scale = 0.5
  [[frame.field]]
  bind = "fault.any"
  byte = 3
  bit = 0

[[frame]]
id = 0x330
period_ms = 500
  [[frame.field]]
  bind = "temp[1]"
  byte = 0
  offset = -40
`

// TestCheckLive watches a live tcp-can source fed in real time by a
// simulated gateway: a go (exit 0) marked live, then a gateway that sends
// nothing: could not check (exit 2).
func TestCheckLive(t *testing.T) {
	dir := t.TempDir()
	for _, c := range []struct {
		name   string
		silent bool
		code   int
	}{{"live go", false, exitOK}, {"silent gateway", true, exitBad}} {
		t.Run(c.name, func(t *testing.T) {
			ln, err := net.Listen("tcp", "127.0.0.1:0")
			if err != nil {
				t.Fatal(err)
			}
			path := filepath.Join(dir, c.name+".toml")
			os.WriteFile(path, []byte(fmt.Sprintf(liveProfile, ln.Addr().String())), 0o644)
			p, err := config.Load(path)
			if err != nil {
				t.Fatal(err)
			}
			m, err := decode.Compile(p)
			if err != nil {
				t.Fatal(err)
			}
			start := time.Now()
			s, err := sim.New(m, sim.Options{Speed: sim.SpeedMax, Start: start, Seed: 3, For: time.Minute})
			if err != nil {
				t.Fatal(err)
			}
			var gen checkSliceSink
			if err := s.Run(context.Background(), &gen); err != nil {
				t.Fatal(err)
			}
			ctx, cancel := context.WithCancel(context.Background())
			done := make(chan struct{})
			go func() { // the gateway: sends the simulated frames at their pace
				defer close(done)
				conn, err := ln.Accept()
				if err != nil {
					return
				}
				defer conn.Close()
				if c.silent {
					<-ctx.Done()
					return
				}
				fw := bus.NewFrameWriter(conn)
				tick := time.NewTicker(20 * time.Millisecond)
				defer tick.Stop()
				t0, i := time.Now(), 0
				for {
					select {
					case <-ctx.Done():
						return
					case <-tick.C:
					}
					due := start.UnixNano() + int64(time.Since(t0))
					var fs []can.Frame
					for ; i < len(gen.msgs) && gen.msgs[i].T <= due; i++ {
						fs = append(fs, gen.msgs[i].Frame)
					}
					if fw.WriteFrames(fs) != nil {
						return
					}
				}
			}()
			code, out, errOut := runCheckCLI(t, filepath.Join(dir, "checks.db"), "--profile", path, "--for", "3s", "--operator", "bench")
			cancel()
			ln.Close()
			<-done
			if code != c.code || !strings.Contains(out, "live sources gw (live)") || strings.Contains(out, "NOT LIVE") {
				t.Errorf("exit %d, want %d\n%s%s", code, c.code, out, errOut)
			}
		})
	}
}

type checkSliceSink struct{ msgs []bus.Message }

func (s *checkSliceSink) Deliver(b []bus.Message) { s.msgs = append(s.msgs, b...) }
func (s *checkSliceSink) Status(bus.Status)       {}
