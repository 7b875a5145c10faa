package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"packwatch/analyze/synthtest"
	"packwatch/bus"
	"packwatch/record"
)

const analyzeProfile = "../../analyze/testdata/string4.toml"

// synthMessages makes a short session from the simulator's cell model: a
// rest, a 10 s 40 A pulse, a 1 C discharge to 3.0 V on the lowest cell and a
// rest, as frames of analyze/testdata/string4.toml.
func synthMessages(t *testing.T) ([]bus.Message, int64) {
	t.Helper()
	synthOnce.Do(func() { synthMsgs, synthStart = makeSynthMessages() })
	return synthMsgs, synthStart
}

var (
	synthOnce  sync.Once
	synthMsgs  []bus.Message
	synthStart int64
)

func makeSynthMessages() (msgs []bus.Message, start int64) {
	p := synthtest.New(4, 20, 0.002, 0.001, 20000, synthtest.KneeOCV(), 0.6)
	p.Emit = func(b []bus.Message) { msgs = append(msgs, b...) }
	p.Hold(0, 60)
	p.Hold(-40, 10)
	p.Hold(0, 60)
	p.DischargeUntil(-20, 3.0, 3*3600)
	p.Hold(0, 120)
	p.Flush()
	return msgs, p.Start
}

func writeSynthCapture(t *testing.T) string {
	t.Helper()
	msgs, start := synthMessages(t)
	var b []byte
	b = append(b, "# start 2026-05-01T08:00:00Z\n"...)
	for i := range msgs {
		b = bus.AppendCapture(b, &msgs[i], start, "bms")
	}
	path := filepath.Join(t.TempDir(), "session.capture")
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

func writeSynthRecording(t *testing.T) string { return writeSynthRecordingV(t, "") }

// writeSynthRecordingV records the session; a non-empty later profile text
// is stored as a second version taking effect 10 s before the end.
func writeSynthRecordingV(t *testing.T, later string) string {
	t.Helper()
	msgs, start := synthMessages(t)
	text, err := os.ReadFile(analyzeProfile)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "session.db")
	w, err := record.Create(path, record.Meta{Tool: "packwatch", Mode: "simulated",
		Sources: []record.SourceInfo{{Index: 0, Name: "bms", Kind: "socketcan", Device: "can0"}}}, record.Options{Lossless: true})
	if err != nil {
		t.Fatal(err)
	}
	w.Profile(start, "string4.toml", string(text), "")
	if later != "" {
		w.Profile(msgs[len(msgs)-1].T-10e9, "string4-later.toml", later, "")
	}
	for i := 0; i < len(msgs); i += 1000 {
		w.Write(msgs[i:min(i+1000, len(msgs))])
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestReportJSON runs "report --json" on a capture and on a recording of
// the same session and checks the keys the issue names and that both agree.
func TestReportJSON(t *testing.T) {
	cap := writeSynthCapture(t)
	rec := writeSynthRecording(t)
	var results []map[string]any
	for _, args := range [][]string{
		{cap, "--json", "--profile", analyzeProfile},
		{"--json", rec},
	} {
		var out, errb bytes.Buffer
		code := runReport(context.Background(), args, &out, &errb)
		if code != exitOK {
			t.Fatalf("report %v: exit %d\n%s", args, code, errb.String())
		}
		var m map[string]any
		if err := json.Unmarshal(out.Bytes(), &m); err != nil {
			t.Fatalf("report %v: %v\n%s", args, err, out.String())
		}
		for _, k := range []string{"discharge_capacity_ah", "discharge_energy_wh", "charge_capacity_ah", "coulombic_efficiency",
			"knee_v_per_cell", "suggested_cutoff_v_per_cell", "ah_below_cutoff", "weakest_cell", "pulses", "bursts", "ica_peaks", "precharge", "safety"} {
			if _, ok := m[k]; !ok {
				t.Errorf("report %v: no key %q", args, k)
			}
		}
		pulses, _ := m["pulses"].([]any)
		if len(pulses) == 0 {
			t.Fatalf("report %v: no pulses", args)
		}
		p0 := pulses[0].(map[string]any)
		for _, k := range []string{"t_s", "delta_a", "r0_mohm", "r1s_mohm", "r10s_mohm", "cells", "soc_pct", "temp_c"} {
			if _, ok := p0[k]; !ok {
				t.Errorf("report %v: pulse has no %q", args, k)
			}
		}
		// the 40 A pulse from rest on four 2 mΩ cells (the model's R0)
		if r0, _ := p0["r0_mohm"].(float64); r0 < 0.95*8 || r0 > 1.05*8 {
			t.Errorf("report %v: pack R0 %v mΩ, model 8 mΩ", args, p0["r0_mohm"])
		}
		results = append(results, m)
	}
	if a, b := results[0]["discharge_capacity_ah"], results[1]["discharge_capacity_ah"]; a != b {
		t.Errorf("capture %v Ah and recording %v Ah differ", a, b)
	}
}

// TestReportHTMLAndErrors: -o OUT.html writes a standalone page with the
// caution; a capture without --profile, a missing file and a bad -o are
// bad input (exit 2).
func TestReportHTMLAndErrors(t *testing.T) {
	cap := writeSynthCapture(t)
	out := filepath.Join(t.TempDir(), "r.html")
	var so, se bytes.Buffer
	if code := runReport(context.Background(), []string{cap, "--profile", analyzeProfile, "-o", out}, &so, &se); code != exitOK {
		t.Fatalf("exit %d: %s", code, se.String())
	}
	page, err := os.ReadFile(out)
	if err != nil || !bytes.Contains(page, []byte("never the protection")) || !bytes.Contains(page, []byte("data:image/svg")) {
		t.Errorf("page: %v, %d bytes", err, len(page))
	}
	if !strings.Contains(so.String(), "never the protection") {
		t.Errorf("summary lacks the caution:\n%s", so.String())
	}
	for _, args := range [][]string{
		{cap},
		{filepath.Join(t.TempDir(), "absent.capture"), "--profile", analyzeProfile},
		{cap, "--profile", analyzeProfile, "-o", "x.pdf"},
		{cap, "--profile", analyzeProfile, "--step", "-1Ah"},
	} {
		var o, e bytes.Buffer
		if code := runReport(context.Background(), args, &o, &e); code != exitBad || e.Len() == 0 {
			t.Errorf("report %v: exit %d, stderr %q; want 2 with a message", args, code, e.String())
		}
	}
}

// TestCurve: CSV on stdout with the curve's C-rate and temperature; PNG and
// SVG files; --compare overlays a second file.
func TestCurve(t *testing.T) {
	cap := writeSynthCapture(t)
	var o, e bytes.Buffer
	if code := runCurve(context.Background(), []string{cap, "--profile", analyzeProfile, "--cells", "--step", "500mAh"}, &o, &e); code != exitOK {
		t.Fatalf("exit %d: %s", code, e.String())
	}
	lines := strings.Split(strings.TrimSpace(o.String()), "\n")
	if lines[0] != "source,run_from_s,kind,label,cell,mean_a,c_rate,mean_temp_c,ah,v" {
		t.Errorf("header %q", lines[0])
	}
	cellsSeen := map[string]bool{}
	for _, l := range lines[1:] {
		f := strings.Split(l, ",")
		if len(f) != 10 {
			t.Fatalf("row %q", l)
		}
		cellsSeen[f[3]] = true
		if f[2] == "discharge" && (!strings.HasPrefix(f[6], "0.99") && !strings.HasPrefix(f[6], "1")) || f[7] != "24" {
			t.Errorf("row %q: want 1 C and 24 °C", l)
			break
		}
	}
	if len(cellsSeen) != 5 {
		t.Errorf("curves %v, want pack and 4 cells", cellsSeen)
	}
	dir := t.TempDir()
	for _, name := range []string{"c.png", "c.svg"} {
		out := filepath.Join(dir, name)
		args := []string{cap, "--profile", analyzeProfile, "-o", out}
		if name == "c.svg" {
			args = append(args, "--compare", cap)
		}
		if code := runCurve(context.Background(), args, &o, &e); code != exitOK {
			t.Fatalf("%s: exit %d: %s", name, code, e.String())
		}
		b, err := os.ReadFile(out)
		magic := map[string]string{"c.png": "\x89PNG", "c.svg": "<?xml"}[name]
		if err != nil || !bytes.HasPrefix(b, []byte(magic)) {
			t.Errorf("%s: %v, starts %q", name, err, b[:min(8, len(b))])
		}
	}
}

// FuzzParseStep: a charge step never panics, and an accepted one is a
// positive finite number of Ah.
func FuzzParseStep(f *testing.F) {
	for _, s := range []string{"1Ah", "0.5ah", "500mAh", "2", "-1Ah", "NaN", "Inf", "", "1e308mAh", "ah"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		v, err := parseStep(s)
		if err == nil && !(v > 0 && !math.IsInf(v, 0) && !math.IsNaN(v)) {
			t.Fatalf("parseStep(%q) = %v", s, v)
		}
	})
}

// TestParseStep: the units of --step.
func TestParseStep(t *testing.T) {
	for in, want := range map[string]float64{"1Ah": 1, "0.5Ah": 0.5, "500mAh": 0.5, "2": 2, " 3 AH ": 3} {
		if got, err := parseStep(in); err != nil || got != want {
			t.Errorf("parseStep(%q) = %v, %v; want %v", in, got, err, want)
		}
	}
	for _, in := range []string{"0", "-1Ah", "x", "NaN", "+Inf"} {
		if _, err := parseStep(in); err == nil {
			t.Errorf("parseStep(%q) accepted", in)
		}
	}
}

// TestReportProfileVersions: each profile version stored in a recording
// decodes the messages from the data time it took effect. The later version
// here doubles the current's scale for the last 10 s only; the pulse near
// the start must still give the model's 8 mΩ, not half of it.
func TestReportProfileVersions(t *testing.T) {
	text, err := os.ReadFile(analyzeProfile)
	if err != nil {
		t.Fatal(err)
	}
	later := strings.Replace(string(text), "  signed = true\n  scale = 0.001", "  signed = true\n  scale = 0.002", 1)
	if later == string(text) {
		t.Fatal("test profile changed: no current scale to alter")
	}
	rec := writeSynthRecordingV(t, later)
	var out, errb bytes.Buffer
	if code := runReport(context.Background(), []string{rec, "--json"}, &out, &errb); code != exitOK {
		t.Fatalf("exit %d: %s", code, errb.String())
	}
	var m struct {
		Pulses []struct {
			R0 float64 `json:"r0_mohm"`
		} `json:"pulses"`
	}
	if err := json.Unmarshal(out.Bytes(), &m); err != nil || len(m.Pulses) == 0 {
		t.Fatalf("%v, %d pulses", err, len(m.Pulses))
	}
	if r0 := m.Pulses[0].R0; r0 < 0.95*8 || r0 > 1.05*8 {
		t.Errorf("first pulse R0 %.3f mΩ, model 8 mΩ: decoded with the wrong profile version", r0)
	}
}
