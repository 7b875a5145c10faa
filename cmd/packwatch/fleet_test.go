package main

import (
	"context"
	"fmt"
	"math"
	"os/exec"
	"strings"
	"testing"
	"time"

	"packwatch/metrics/promtest"
	"packwatch/pack"
)

// TestFleetPrometheus: a real Prometheus server (the Debian package
// prometheus) scrapes a two-pack demo, and a PromQL query for the lowest
// cell margin per pack answers one series per pack, agreeing with
// /api/state.
func TestFleetPrometheus(t *testing.T) {
	bin, err := exec.LookPath("prometheus")
	if err != nil {
		promtest.SkipOrFail(t, "prometheus not found in PATH (Debian package prometheus): "+err.Error())
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	url, _, errb, code := startCLI(t, ctx, "demo", "--packs", "2", "--addr", "127.0.0.1:0", "--speed", "1")
	defer func() {
		cancel()
		if c := <-code; c != 0 {
			t.Errorf("demo exit %d: %s", c, errb.String())
		}
	}()
	snap := waitState(t, url, func(s *pack.Snapshot) bool {
		return len(s.Packs) == 2 && s.Packs[0].CellStats.Reporting == 12 && s.Packs[1].CellStats.Reporting == 12
	})
	want := map[string]float64{}
	for _, p := range snap.Packs {
		lowest := math.Inf(1)
		for _, m := range p.Margins {
			if (m.Limit == "cell_low" || m.Limit == "cell_high") && m.Margin != nil {
				lowest = math.Min(lowest, float64(*m.Margin))
			}
		}
		want[p.ID] = lowest
	}
	if _, ok := want["pod-a"]; !ok || len(want) != 2 {
		t.Fatalf("packs in /api/state: %v", want)
	}
	prom := promtest.Start(t, ctx, bin, strings.TrimSuffix(strings.TrimPrefix(url, "http://"), "/"), "")
	q := `min by (pack) (packwatch_limit_margin_volts{limit=~"cell_low|cell_high"})`
	var res []promtest.Sample
	prom.WaitFor(ctx, t, q, func() (bool, string) {
		res, err = prom.Query(ctx, q)
		if err != nil {
			return false, err.Error()
		}
		return len(res) == 2, fmt.Sprintf("%d series", len(res))
	})
	for _, s := range res {
		id := s.Metric["pack"]
		w, ok := want[id]
		// at 1× the resting demo pack moves well under 5 mV between the two reads
		if !ok || math.Abs(s.Float(t)-w) > 0.005 {
			t.Errorf("pack %q: lowest cell margin %v from Prometheus, %v from /api/state", id, s.Float(t), w)
		}
	}
}
