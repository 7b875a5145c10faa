package metrics

import (
	"bytes"
	"encoding/json"
	"net/http/httptest"
	"os"
	"testing"

	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"

	"packwatch/pack"
)

// FuzzExposition feeds arbitrary snapshots (as /api/state JSON) to the
// handler: a scrape must never panic, must answer 200 and must parse as the
// Prometheus text format, whatever the names, numbers and states in it.
func FuzzExposition(f *testing.F) {
	seed, err := os.ReadFile("testdata/snapshot.json")
	if err != nil {
		f.Fatal(err)
	}
	f.Add(seed)
	f.Add([]byte(`{"seq":1,"packs":[{"id":"a","cells":[{"n":1,"v":3.9,"state":"ok"},{"n":1,"v":3.8,"state":"ok"}]}]}`))
	f.Add([]byte(`{"seq":2,"packs":[{"id":"a\xff","margins":[{"limit":"x","unit":"V","margin":1e308,"bound":-1e308,"state":"weird"}]}]}`))
	f.Add([]byte(`{"packs":[{"id":""},{"id":""}]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		var s pack.Snapshot
		if json.Unmarshal(data, &s) != nil {
			return
		}
		h := NewHandler(Options{})
		h.Observe(&s)
		h.Observe(&s)
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, httptest.NewRequest("GET", "/metrics", nil))
		if rec.Code != 200 {
			t.Fatalf("status %d: %s", rec.Code, rec.Body)
		}
		p := expfmt.NewTextParser(model.UTF8Validation)
		if _, err := p.TextToMetricFamilies(bytes.NewReader(rec.Body.Bytes())); err != nil {
			t.Fatalf("exposition does not parse: %v\n%s", err, rec.Body)
		}
	})
}
