package check

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
	"packwatch/pack"
	"packwatch/sim"
)

// simStart is the data time the simulated captures start at.
var simStart = time.Date(2026, 5, 1, 8, 0, 0, 0, time.UTC)

// captureSink writes what the simulator sends as a capture.
type captureSink struct {
	names []string
	start int64
	buf   []byte
}

func (c *captureSink) Deliver(batch []bus.Message) {
	for i := range batch {
		c.buf = bus.AppendCapture(c.buf, &batch[i], c.start, c.names[batch[i].Src])
	}
}

func (c *captureSink) Status(bus.Status) {}

func loadPod(t *testing.T) (*config.Profile, *decode.Map) {
	t.Helper()
	p, err := config.Load("testdata/pod.toml")
	if err != nil {
		t.Fatal(err)
	}
	m, err := decode.Compile(p)
	if err != nil {
		t.Fatal(err)
	}
	return p, m
}

// restScenario: the pod's pack resting at 60 % in 20 °C air.
func restScenario() *sim.Scenario {
	soc, amb := 60.0, 20.0
	return &sim.Scenario{Name: "pod-rest", StartSOCPct: &soc, AmbientC: &amb, End: "hold",
		Steps: []sim.Step{{Kind: "rest", For: sim.Duration(time.Hour)}}}
}

// simCapture runs the simulator for d of data time with the faults and
// writes the capture to a file.
func simCapture(t *testing.T, m *decode.Map, d time.Duration, faults ...sim.Fault) string {
	t.Helper()
	s, err := sim.New(m, sim.Options{Speed: sim.SpeedMax, Scenario: restScenario(), Faults: faults, Start: simStart, Seed: 7, For: d})
	if err != nil {
		t.Fatal(err)
	}
	sink := &captureSink{names: SourceNames(m.Profile()), start: simStart.UnixNano()}
	sink.buf = append(sink.buf, "# start "+simStart.Format(time.RFC3339)+"\n"...)
	if err := s.Run(context.Background(), sink); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "sim.capture")
	if err := os.WriteFile(path, sink.buf, 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// checkCapture checks the last 10 s of a capture of the pod.
func checkCapture(t *testing.T, p *config.Profile, m *decode.Map, path string, confirmed []bool) *Record {
	t.Helper()
	eng := pack.NewEngine(pack.Options{})
	if err := eng.AddPack("pod", m, nil); err != nil {
		t.Fatal(err)
	}
	w, raw, info, err := RunCapture(context.Background(), eng, "pod", p, path, 10*time.Second, nil)
	if err != nil {
		t.Fatal(err)
	}
	return NewRecord(w, raw, Resolve(p), Inputs{Profile: p, PackID: "pod", Operator: "test", Data: info,
		Confirmed: confirmed, Now: simStart.Add(time.Hour)})
}

func failing(r *Record) []string {
	var out []string
	for _, x := range r.Rules {
		if x.Status == Fail || x.Status == NoData {
			out = append(out, x.ID)
		}
	}
	return out
}

// TestSimulatedScenarios checks captures of the simulator with one fault
// each: the healthy pack is a go once the checklist is confirmed, each fault
// a no-go naming the rule it breaks. The expectations follow from the fault
// definitions in sim/fault.go and the pod's profile, not from a run.
func TestSimulatedScenarios(t *testing.T) {
	p, m := loadPod(t)
	all := []bool{true, true}
	cases := []struct {
		name    string
		faults  []sim.Fault
		verdict string
		fail    []string // rules that must fail or have no data
		pass    []string // rules that must still pass
	}{
		{"healthy", nil, VerdictGo, nil, []string{"reporting", "soc", "spread", "temperature", "fault_flags", "rate.bms", "rate.console"}},
		// 80 % capacity, balanced at the top: at 60 % of the pack it stands
		// 10 points lower, tens of mV below the others at rest.
		{"weak cell", []sim.Fault{{Kind: sim.FaultWeakCell, N: 5}}, VerdictNoGo, []string{"spread"}, []string{"reporting", "soc", "fault_flags"}},
		// the busbar sensor runs 5 °C past temp_high_c (55 °C).
		{"hot sensor", []sim.Fault{{Kind: sim.FaultHotSensor}}, VerdictNoGo, []string{"temperature"}, []string{"spread", "soc", "rate.bms"}},
		// the console (temperatures) stops 10 s before the window.
		{"source went silent", []sim.Fault{{Kind: sim.FaultSilent, Source: "console", After: 20 * time.Second}}, VerdictNoGo, []string{"rate.console", "reporting", "temperature"}, []string{"rate.bms", "spread", "soc"}},
		{"fault flag", []sim.Fault{{Kind: sim.FaultFlag, After: 5 * time.Second}}, VerdictNoGo, []string{"fault_flags"}, []string{"spread", "temperature", "rate.bms"}},
		// starts at 8 %, below min_soc_pct 30.
		{"SOC too low", []sim.Fault{{Kind: sim.FaultLowSOC}}, VerdictNoGo, []string{"soc"}, []string{"reporting", "fault_flags", "rate.bms"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			path := simCapture(t, m, 40*time.Second, c.faults...)
			r := checkCapture(t, p, m, path, all)
			var text strings.Builder
			WriteText(&text, r)
			if r.Verdict != c.verdict {
				t.Fatalf("verdict %s, want %s\n%s", r.Verdict, c.verdict, text.String())
			}
			bad := strings.Join(failing(r), " ")
			for _, id := range c.fail {
				if !strings.Contains(" "+bad+" ", " "+id+" ") {
					t.Errorf("rule %s did not fail; failing: %s\n%s", id, bad, text.String())
				}
			}
			for _, id := range c.pass {
				if x := find(r.Rules, id); x == nil || x.Status != Pass {
					t.Errorf("rule %s: %+v\n%s", id, x, text.String())
				}
			}
			if r.Data.Mode != ModeCapture || !strings.Contains(r.Data.Notice, "FROM A CAPTURE") || r.Data.AgeS == nil {
				t.Errorf("data %+v", r.Data)
			}
			if r.Raw.Messages == 0 || !strings.HasPrefix(r.Raw.Text, "# start 2026-05-01T08:00:30Z\n") {
				t.Errorf("raw: %d messages, starts %q", r.Raw.Messages, r.Raw.Text[:min(60, len(r.Raw.Text))])
			}
		})
	}
}

// The checklist decides as well: unconfirmed items make a healthy pack a no-go.
func TestSimulatedHealthyNeedsChecklist(t *testing.T) {
	p, m := loadPod(t)
	r := checkCapture(t, p, m, simCapture(t, m, 20*time.Second), []bool{true})
	if r.Verdict != VerdictNoGo || strings.Join(failing(r), " ") != "manual.2" {
		t.Fatalf("verdict %s failing %v", r.Verdict, failing(r))
	}
}

// Asking for more than the capture holds checks what there is and says so.
func TestCaptureShorterThanAsked(t *testing.T) {
	p, m := loadPod(t)
	path := simCapture(t, m, 20*time.Second)
	eng := pack.NewEngine(pack.Options{})
	if err := eng.AddPack("pod", m, nil); err != nil {
		t.Fatal(err)
	}
	w, _, info, err := RunCapture(context.Background(), eng, "pod", p, path, time.Minute, nil)
	if err != nil {
		t.Fatal(err)
	}
	if w.Seconds() > 20 || w.Seconds() < 19 || !strings.Contains(info.Source, "less than the 1m0s asked for") {
		t.Errorf("window %.1f s, source %q", w.Seconds(), info.Source)
	}
	if r := find(Evaluate(w, Resolve(p)), "rate.bms"); r.Status != Pass {
		t.Errorf("rate over a clamped window: %+v", r)
	}
}
