package main

import (
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"os"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite golden files")

func runCLI(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(context.Background(), args, &out, &errb)
	return code, out.String(), errb.String()
}

func TestParseArgs(t *testing.T) {
	fs := newFlags("x", &bytes.Buffer{})
	format := fs.String("format", "csv", "")
	verbose := fs.Bool("v", false, "")
	var binds listFlag
	fs.Var(&binds, "bind", "")
	pos, err := parseArgs(fs, []string{"rec.db", "--format", "jsonl", "-v", "--bind", "a", "other", "--bind=b"})
	if err != nil {
		t.Fatal(err)
	}
	if *format != "jsonl" || !*verbose || strings.Join(pos, ",") != "rec.db,other" || binds.String() != "a,b" {
		t.Errorf("format=%s v=%v pos=%v binds=%v", *format, *verbose, pos, binds)
	}
}

func TestValidate(t *testing.T) {
	code, out, errOut := runCLI(t, "validate", "../../config/examples/buoy-winch.toml")
	if code != 0 || !strings.Contains(out, "bindings covered (19)") {
		t.Errorf("example: code %d\n%s%s", code, out, errOut)
	}
	code, _, errOut = runCLI(t, "validate", "--profile", "../../config/testdata/broken/overlap.toml")
	if code != 2 || !strings.HasPrefix(errOut, "../../config/testdata/broken/overlap.toml:21:10: ") {
		t.Errorf("broken: code %d, stderr %q", code, errOut)
	}
	if code, _, _ := runCLI(t, "validate"); code != 2 {
		t.Errorf("no profile: code %d, want 2", code)
	}
	if code, _, _ := runCLI(t, "nonsense"); code != 2 {
		t.Errorf("unknown command: code %d, want 2", code)
	}
}

// TestDecodeCapture decodes the example capture; the output is kept in a
// golden file (go test ./cmd/packwatch -update to rewrite it after review).
func TestDecodeCapture(t *testing.T) {
	code, out, errOut := runCLI(t, "decode", "--input", "../../bus/testdata/example.capture", "--profile", "../../config/examples/buoy-winch.toml")
	if code != 0 {
		t.Fatalf("code %d: %s", code, errOut)
	}
	if !strings.Contains(errOut, "capture line 9") || !strings.Contains(errOut, "2 malformed line(s) skipped") {
		t.Errorf("malformed lines not reported: %q", errOut)
	}
	golden := "testdata/decode-example.golden"
	if *update {
		os.WriteFile(golden, []byte(out), 0o644)
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatal(err)
	}
	if out != string(want) {
		t.Errorf("output differs from %s:\n%s", golden, out)
	}
	for _, l := range strings.Split(strings.TrimSpace(out), "\n") {
		var v map[string]any
		if err := json.Unmarshal([]byte(l), &v); err != nil {
			t.Errorf("not JSON: %q", l)
		}
	}
}

func TestDecodeState(t *testing.T) {
	code, out, errOut := runCLI(t, "decode", "--profile", "../../config/examples/buoy-winch.toml", "--input", "../../bus/testdata/example.capture", "--state")
	if code != 0 {
		t.Fatalf("code %d: %s", code, errOut)
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	var st struct {
		Name      string `json:"name"`
		CellStats struct {
			Min     *float64 `json:"min_v"`
			MinCell int      `json:"min_cell"`
			Max     *float64 `json:"max_v"`
			MaxCell int      `json:"max_cell"`
		} `json:"cell_stats"`
	}
	if err := json.Unmarshal([]byte(lines[len(lines)-1]), &st); err != nil {
		t.Fatal(err)
	}
	// cells 1..6 and the console's cell 3 (3.912 V, the lowest) were decoded
	if st.Name != "Buoy winch pack" || st.CellStats.Min == nil || *st.CellStats.Min != 3.912 || st.CellStats.MinCell != 3 || *st.CellStats.Max != 3.925 || st.CellStats.MaxCell != 6 {
		t.Errorf("state: %+v", st)
	}
}
