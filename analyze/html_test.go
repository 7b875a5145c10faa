package analyze

import (
	"bytes"
	"os"
	"strings"
	"testing"
)

// TestHTMLReport: the page stands alone (figures inlined, nothing fetched)
// and carries the safety caution (README "Safety").
func TestHTMLReport(t *testing.T) {
	s, _ := synthSession(t)
	rep := Analyze(s, Options{})
	var b bytes.Buffer
	if err := WriteHTML(&b, rep); err != nil {
		t.Fatal(err)
	}
	page := b.String()
	for _, want := range []string{"never the protection", "data:image/svg", "@media print", "IEC 61960-3", "HPPC", "k = 3", "cell 3"} {
		if !strings.Contains(page, want) {
			t.Errorf("page lacks %q", want)
		}
	}
	for _, bad := range []string{"http://", "https://", "<script", "NaN"} {
		if strings.Contains(page, bad) {
			t.Errorf("page contains %q", bad)
		}
	}
	if d := os.Getenv("PACKWATCH_REPORT_OUT"); d != "" {
		os.WriteFile(d, b.Bytes(), 0o644)
	}
}
