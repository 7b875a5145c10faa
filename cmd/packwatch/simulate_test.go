package main

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"
)

// TestSimulateCaptureDecodes: simulate writes a capture that decode reads
// back to values consistent with the story (a resting NMC pack: every cell
// between 3.0 and 4.25 V, current at rest near 0 A).
func TestSimulateCaptureDecodes(t *testing.T) {
	capture := filepath.Join(t.TempDir(), "sim.capture")
	code, _, errOut := runCLI(t, "simulate", "--profile", exampleProfile, "--to", "capture:"+capture, "--for", "60s", "--speed", "max")
	if code != 0 {
		t.Fatalf("simulate: %d %s", code, errOut)
	}
	code, out, errOut := runCLI(t, "decode", "--profile", exampleProfile, "--input", capture, "--state")
	if code != 0 {
		t.Fatalf("decode: %d %s", code, errOut)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) < 100 {
		t.Fatalf("only %d lines decoded", len(lines))
	}
	var st struct {
		CellStats struct {
			Min       *float64 `json:"min_v"`
			Reporting int      `json:"reporting"`
		} `json:"cell_stats"`
		Current *float64 `json:"current_a"`
	}
	if err := json.Unmarshal([]byte(lines[len(lines)-1]), &st); err != nil {
		t.Fatal(err)
	}
	if st.CellStats.Reporting != 12 || st.CellStats.Min == nil || *st.CellStats.Min < 3.0 || *st.CellStats.Min > 4.25 {
		t.Errorf("cells: %+v", st.CellStats)
	}
	if st.Current == nil || *st.Current > 5 || *st.Current < -5 {
		t.Errorf("current at rest = %v", st.Current)
	}
	// an existing capture is not overwritten without --force
	if code, _, _ := runCLI(t, "simulate", "--profile", exampleProfile, "--to", "capture:"+capture, "--for", "1s", "--speed", "max"); code != 2 {
		t.Errorf("overwrite without --force: exit %d, want 2", code)
	}
	if code, _, _ := runCLI(t, "simulate", "--profile", exampleProfile, "--to", "nowhere:x"); code != 2 {
		t.Errorf("bad --to: exit %d, want 2", code)
	}
}
