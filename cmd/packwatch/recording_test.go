package main

import (
	"bytes"
	"encoding/csv"
	"encoding/hex"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

const exampleProfile = "../../config/examples/buoy-winch.toml"
const exampleCapture = "../../bus/testdata/example.capture"

// bigCapture writes a capture of n cell frames with slowly changing values.
func bigCapture(t *testing.T, n int) string {
	t.Helper()
	var b strings.Builder
	b.WriteString("# start 2026-05-01T08:00:00Z\n")
	for i := 0; i < n; i++ {
		mv := 3600 + i%200
		b.WriteString(strings.Join([]string{
			formatSec(float64(i) * 0.025), "bms", "can", "4C0",
			hexBytes(byte(i%4), byte(mv), byte(mv>>8), byte(mv+1), byte((mv+1)>>8), byte(mv+2), byte((mv+2)>>8)),
		}, " ") + "\n")
		if i%4 == 0 {
			b.WriteString(formatSec(float64(i)*0.025+0.01) + " bms can 4D0 FF38125000010200\n")
		}
	}
	path := filepath.Join(t.TempDir(), "big.capture")
	os.WriteFile(path, []byte(b.String()), 0o644)
	return path
}

func formatSec(s float64) string { return strconv.FormatFloat(s, 'f', 3, 64) }

func TestImportExportRoundTrip(t *testing.T) {
	for _, capture := range []string{exampleCapture, bigCapture(t, 2000)} {
		db := filepath.Join(t.TempDir(), "rec.db")
		if code, _, errOut := runCLI(t, "import", capture, "--profile", exampleProfile, "-o", db); code != 0 {
			t.Fatalf("import: %d %s", code, errOut)
		}
		_, want, _ := runCLI(t, "decode", "--profile", exampleProfile, "--input", capture)
		code, got, errOut := runCLI(t, "export", db, "--format", "jsonl")
		if code != 0 {
			t.Fatalf("export: %d %s", code, errOut)
		}
		if got != want || len(want) == 0 {
			t.Errorf("%s: export of the imported recording differs from decode of the capture\nexport: %.300s\ndecode: %.300s", capture, got, want)
		}
		// an existing file is never overwritten without --force
		if code, _, errOut := runCLI(t, "import", capture, "--profile", exampleProfile, "-o", db); code != 2 || !strings.Contains(errOut, "exists") {
			t.Errorf("second import: code %d, %q", code, errOut)
		}
		if code, _, _ := runCLI(t, "import", capture, "--profile", exampleProfile, "-o", db, "--force"); code != 0 {
			t.Errorf("import --force: code %d", code)
		}
	}
}

// TestExportRedecode: a corrected profile (cell scale doubled) changes the
// exported values accordingly, from the same raw messages.
func TestExportRedecode(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "rec.db")
	if code, _, errOut := runCLI(t, "import", exampleCapture, "--profile", exampleProfile, "-o", db); code != 0 {
		t.Fatal(errOut)
	}
	ex, _ := os.ReadFile(exampleProfile)
	other := filepath.Join(dir, "other.toml")
	os.WriteFile(other, bytes.Replace(ex, []byte("  scale = 0.001\n  [[frame]]"), []byte("  scale = 0.002\n  [[frame]]"), 1), 0o644)
	fixed := bytes.Replace(ex, []byte("order = \"little\"\n  scale = 0.001"), []byte("order = \"little\"\n  scale = 0.002"), 1)
	if bytes.Equal(fixed, ex) {
		t.Fatal("test profile edit did not apply")
	}
	os.WriteFile(other, fixed, 0o644)
	_, orig, _ := runCLI(t, "export", db, "--bind", "cell[4].voltage")
	_, redone, errOut := runCLI(t, "export", db, "--bind", "cell[4].voltage", "--profile", other)
	read := func(s string) [][]string {
		recs, err := csv.NewReader(strings.NewReader(s)).ReadAll()
		if err != nil {
			t.Fatalf("CSV does not read back: %v\n%s", err, s)
		}
		return recs
	}
	a, b := read(orig), read(redone)
	if len(a) < 2 || len(a) != len(b) {
		t.Fatalf("rows %d vs %d: %s", len(a), len(b), errOut)
	}
	last := len(a) - 1
	if a[0][2] != "cell[4].voltage [V]" || a[last][2] != "3.916" || b[last][2] != "7.832" {
		t.Errorf("re-decode: %v → %v", a[last], b[last])
	}
}

func TestExportCSVEvery(t *testing.T) {
	db := filepath.Join(t.TempDir(), "rec.db")
	if code, _, errOut := runCLI(t, "import", bigCapture(t, 400), "--profile", exampleProfile, "-o", db); code != 0 {
		t.Fatal(errOut)
	}
	for _, comma := range []bool{false, true} {
		args := []string{"export", db, "--every", "1s", "--stat", "max", "--bind", "cell[1].voltage", "--bind", "pack.current"}
		if comma {
			args = append(args, "--decimal-comma")
		}
		code, out, errOut := runCLI(t, args...)
		if code != 0 {
			t.Fatal(errOut)
		}
		r := csv.NewReader(strings.NewReader(out))
		if comma {
			r.Comma = ';'
		}
		recs, err := r.ReadAll()
		if err != nil {
			t.Fatal(err)
		}
		// 400 frames at 25 ms span 10 s: 10 one-second rows after the header
		if len(recs) != 11 {
			t.Fatalf("rows = %d, want 11", len(recs))
		}
		// cell 1 is in mux 0 frames (i % 4 == 0): mv = 3600 + i%200; in
		// second 0 (i < 40) the largest is i = 36 → 3.636 V
		want := "3.636"
		if comma {
			want = "3,636"
		}
		if recs[1][2] != want || recs[1][3] != "-20" && recs[1][3] != "-20,0" {
			t.Errorf("first step = %v, want cell 1 max %s, current -20", recs[1], want)
		}
	}
}

func hexBytes(b ...byte) string { return strings.ToUpper(hex.EncodeToString(b)) }
