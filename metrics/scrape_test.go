package metrics

import (
	"fmt"
	"net/http"
	"net/http/httptest"
	"sort"
	"strings"
	"testing"

	dto "github.com/prometheus/client_model/go"
	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"
)

// exposition is one parsed scrape.
type exposition map[string]*dto.MetricFamily

// scrape serves one request as the scraper with this User-Agent and parses
// the Prometheus text format with the parser of github.com/prometheus/common.
func scrape(t *testing.T, h http.Handler, ua string) exposition {
	t.Helper()
	req := httptest.NewRequest("GET", "/metrics", nil)
	req.Header.Set("User-Agent", ua)
	rec := httptest.NewRecorder()
	h.ServeHTTP(rec, req)
	if rec.Code != http.StatusOK {
		t.Fatalf("GET /metrics: %d %s", rec.Code, rec.Body)
	}
	if ct := rec.Header().Get("Content-Type"); !strings.HasPrefix(ct, "text/plain; version=0.0.4") {
		t.Fatalf("content type %q, want the Prometheus text format", ct)
	}
	p := expfmt.NewTextParser(model.UTF8Validation)
	fams, err := p.TextToMetricFamilies(rec.Body)
	if err != nil {
		t.Fatalf("parse /metrics: %v", err)
	}
	return fams
}

// labelsOf gives a sample's labels as a map.
func labelsOf(m *dto.Metric) map[string]string {
	out := map[string]string{}
	for _, l := range m.GetLabel() {
		out[l.GetName()] = l.GetValue()
	}
	return out
}

func sampleValue(m *dto.Metric) float64 {
	switch {
	case m.Gauge != nil:
		return m.GetGauge().GetValue()
	case m.Counter != nil:
		return m.GetCounter().GetValue()
	case m.Untyped != nil:
		return m.GetUntyped().GetValue()
	}
	return 0
}

// find returns the value of the sample of family name whose labels include
// want; ok is false when there is none. More than one match is a test error.
func (x exposition) find(t *testing.T, name string, want ...string) (float64, bool) {
	t.Helper()
	f := x[name]
	if f == nil {
		return 0, false
	}
	var got []float64
	for _, m := range f.GetMetric() {
		l := labelsOf(m)
		match := true
		for i := 0; i+1 < len(want); i += 2 {
			if l[want[i]] != want[i+1] {
				match = false
				break
			}
		}
		if match {
			got = append(got, sampleValue(m))
		}
	}
	switch len(got) {
	case 0:
		return 0, false
	case 1:
		return got[0], true
	}
	t.Errorf("%s%v: %d samples, want one", name, want, len(got))
	return got[0], true
}

// series counts the samples of a family whose labels include want.
func (x exposition) series(name string, want ...string) int {
	n := 0
	for _, m := range x[name].GetMetric() {
		l := labelsOf(m)
		match := true
		for i := 0; i+1 < len(want); i += 2 {
			if l[want[i]] != want[i+1] {
				match = false
			}
		}
		if match {
			n++
		}
	}
	return n
}

func (x exposition) names() string {
	var ns []string
	for n := range x {
		ns = append(ns, n)
	}
	sort.Strings(ns)
	return fmt.Sprint(ns)
}
