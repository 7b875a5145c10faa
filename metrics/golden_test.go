package metrics

import (
	"bytes"
	"encoding/json"
	"flag"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"

	"packwatch/pack"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

// loadSnapshot reads a snapshot in /api/state's JSON.
func loadSnapshot(t *testing.T, name string) *pack.Snapshot {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	var s pack.Snapshot
	if err := json.Unmarshal(b, &s); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return &s
}

func get(t *testing.T, h http.Handler, accept string) *httptest.ResponseRecorder {
	t.Helper()
	req := httptest.NewRequest("GET", "/metrics", nil)
	req.Header.Set("User-Agent", promUA)
	if accept != "" {
		req.Header.Set("Accept", accept)
	}
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, req)
	if rec.Code != http.StatusOK {
		t.Fatalf("GET /metrics: %d %s", rec.Code, rec.Body)
	}
	return rec
}

// golden compares got with testdata/name, or rewrites it with -update.
func golden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if *update {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./metrics -update to create it)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs (go test ./metrics -update rewrites it; review the diff):\n%s", path, got)
	}
}

// The whole exposition of a hand-written snapshot with a stale cell, a
// missing cell, a faulty sensor, a null current-derived time, a limit
// without a value, a limit in an unknown unit, a source of unknown state
// and a fault alarm. Reviewed by hand: series are present exactly for the
// fresh readings.
func TestGoldenText(t *testing.T) {
	h := NewHandler(Options{Version: "1.0.0"})
	h.Observe(loadSnapshot(t, "snapshot.json"))
	rec := get(t, h, "")
	golden(t, "metrics.golden", rec.Body.Bytes())
	p := expfmt.NewTextParser(model.UTF8Validation)
	if _, err := p.TextToMetricFamilies(bytes.NewReader(rec.Body.Bytes())); err != nil {
		t.Errorf("parse: %v", err)
	}
}

// OpenMetrics on request (OpenMetrics 1.0, REFERENCES.md): the content
// type says so, counters are typed by their family name without _total,
// samples keep it, and the exposition ends with "# EOF".
func TestOpenMetrics(t *testing.T) {
	h := NewHandler(Options{Version: "1.0.0"})
	h.Observe(loadSnapshot(t, "snapshot.json"))
	rec := get(t, h, "application/openmetrics-text;version=1.0.0,text/plain;version=0.0.4;q=0.5")
	if ct := rec.Header().Get("Content-Type"); !strings.HasPrefix(ct, "application/openmetrics-text") {
		t.Fatalf("content type %q", ct)
	}
	body := rec.Body.String()
	for _, want := range []string{
		"# TYPE packwatch_trips counter\n",
		"# UNIT packwatch_cell_voltage_volts volts\n",
		"# UNIT packwatch_charge_coulombs coulombs\n",
		"# UNIT packwatch_limit_margin_celsius_per_second celsius_per_second\n",
		`packwatch_trips_total{limit="cell_low",pack="bench"} 1.0` + "\n",
		`packwatch_cell_voltage_volts{cell="1",pack="bench"} 3.912` + "\n",
	} {
		if !strings.Contains(body, want) {
			t.Errorf("OpenMetrics exposition lacks %q:\n%s", want, body)
		}
	}
	if !strings.HasSuffix(body, "# EOF\n") {
		t.Errorf("OpenMetrics exposition does not end with # EOF")
	}
}

type fakeEngine struct{ seq uint64 }

func (f *fakeEngine) Snapshot(now time.Time) *pack.Snapshot {
	f.seq++
	return &pack.Snapshot{Seq: f.seq, ServerTime: now.UTC().Format(time.RFC3339), Mode: "live"}
}

// With Options.Engine every scrape exposes a fresh snapshot.
func TestEngineOption(t *testing.T) {
	h := NewHandler(Options{Engine: &fakeEngine{}})
	for want := 1.0; want <= 3; want++ {
		if v, ok := scrape(t, h, promUA).find(t, "packwatch_snapshots_total"); !ok || v != want {
			t.Errorf("snapshots_total %v, want %v", v, want)
		}
	}
}
