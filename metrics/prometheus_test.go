package metrics

import (
	"context"
	"fmt"
	"math"
	"net/http/httptest"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"testing"
	"time"

	"packwatch/bus"
	"packwatch/metrics/promtest"
)

// TestPrometheusScrape runs a real Prometheus server (the Debian package
// prometheus) against the handler over two packs of a real engine, and asks
// it, through its HTTP API, for the lowest cell margin per pack: one series
// per pack, with the margins /api/state gives. The example rules of
// testdata/rules.yml (the README's) are loaded too and must record the same
// margins and raise the expected alerts.
func TestPrometheusScrape(t *testing.T) {
	bin, err := exec.LookPath("prometheus")
	if err != nil {
		promtest.SkipOrFail(t, "prometheus not found in PATH (Debian package prometheus): "+err.Error())
	}
	ctx, cancel := context.WithTimeout(context.Background(), 45*time.Second)
	defer cancel()

	// Two packs: A discharging with cell 7 at 3.650 V and its highest at
	// 3.710 V; B charging with cell 1 at 4.220 V, 30 mV from the 4.25 V
	// limit of the example profile. A's console says one line at the start
	// and nothing after.
	h := NewHandler(Options{Version: "test"})
	r := newRig(t, h.Observe)
	r.a.cells[6] = 3.650
	for i := range r.b.cells {
		r.b.cells[i] = 4.200 - 0.004*float64(i%4)
	}
	r.b.cells[0] = 4.220
	for src := uint16(0); src < 3; src++ {
		r.e.Status(bus.Status{Src: src, State: bus.StateConnected})
	}
	r.e.Deliver([]bus.Message{{T: r.t, Src: 1, Kind: bus.KindLine, Text: "boot"}})
	r.run(15*time.Second, nil)
	snap := r.last
	// What Prometheus must find, from /api/state: per pack the lowest margin
	// of the two cell limits.
	want := map[string]float64{}
	for _, pv := range arr(apiState(t, snap)["packs"]) {
		p := obj(pv)
		lowest := math.Inf(1)
		for _, mv := range arr(p["margins"]) {
			m := obj(mv)
			if l := str(m["limit"]); l == "cell_low" || l == "cell_high" {
				v, _ := numOf(m["margin"])
				lowest = math.Min(lowest, v)
			}
		}
		want[str(p["id"])] = lowest
	}
	// By hand from the limits of config/examples/buoy-winch.toml (cell_high_v
	// 4.25, cell_low_v 3.00): A 4.25 − 3.710, B 4.25 − 4.220.
	if !near(want[packA], 0.540, 1e-9) || !near(want[packB], 0.030, 1e-9) {
		t.Fatalf("margins in /api/state %v, want A 0.540 and B 0.030", want)
	}

	srv := httptest.NewServer(h)
	defer srv.Close()
	prom := promtest.Start(t, ctx, bin, strings.TrimPrefix(srv.URL, "http://"), filepath.Join("testdata", "rules.yml"))

	check := func(q string) {
		t.Helper()
		var res []promtest.Sample
		prom.WaitFor(ctx, t, q, func() (bool, string) {
			res, err = prom.Query(ctx, q)
			if err != nil {
				return false, err.Error()
			}
			return len(res) == 2, fmt.Sprintf("%d series", len(res))
		})
		sort.Slice(res, func(i, j int) bool { return res[i].Metric["pack"] < res[j].Metric["pack"] })
		for _, s := range res {
			id := s.Metric["pack"]
			w, ok := want[id]
			if !ok || !near(s.Float(t), w, 1e-9) {
				t.Errorf("%s: pack %q lowest cell margin %v, want %v", q, id, s.Float(t), w)
			}
		}
	}
	check(`min by (pack) (packwatch_limit_margin_volts{limit=~"cell_low|cell_high"})`)
	check(`pack:cell_margin_volts:min`) // the README's recording rule

	alerts := func(name string) func() (bool, string) {
		return func() (bool, string) {
			res, err := prom.Query(ctx, `ALERTS{alertname="`+name+`"}`)
			if err != nil {
				return false, err.Error()
			}
			var got []string
			for _, s := range res {
				got = append(got, s.Metric["pack"]+"/"+s.Metric["source"])
			}
			sort.Strings(got)
			return len(got) > 0, strings.Join(got, " ")
		}
	}
	// B's cell is 30 mV from its limit: under 50 mV; A's is not.
	prom.WaitFor(ctx, t, "alert PackCellMarginLow", alerts("PackCellMarginLow"))
	if _, got := alerts("PackCellMarginLow")(); got != packB+"/" {
		t.Errorf("PackCellMarginLow for %q, want %s only", got, packB)
	}
	// A's console has been silent for 15 s of data time; B's has never sent
	// anything, so it has no age (PackSourceNeverHeard covers it).
	prom.WaitFor(ctx, t, "alert PackSourceSilent", alerts("PackSourceSilent"))
	if _, got := alerts("PackSourceSilent")(); got != packA+"/console" {
		t.Errorf("PackSourceSilent for %q, want %s/console only", got, packA)
	}
}
