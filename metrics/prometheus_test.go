package metrics

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"net"
	"net/http"
	"net/http/httptest"
	"net/url"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"packwatch/bus"
)

// skipOrFail skips with the reason, or fails when PACKWATCH_NO_SKIP=1 (CI
// installs what the test needs).
func skipOrFail(t *testing.T, reason string) {
	t.Helper()
	if os.Getenv("PACKWATCH_NO_SKIP") == "1" {
		t.Fatal(reason + " (PACKWATCH_NO_SKIP=1)")
	}
	t.Skip(reason)
}

// syncBuffer collects a process's output while it runs.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// freePort returns a loopback port that was free a moment ago.
func freePort(t *testing.T) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// promSample is one element of an instant vector from the HTTP API.
type promSample struct {
	Metric map[string]string `json:"metric"`
	Value  [2]any            `json:"value"`
}

func (s promSample) float(t *testing.T) float64 {
	t.Helper()
	str, _ := s.Value[1].(string)
	f, err := strconv.ParseFloat(str, 64)
	if err != nil {
		t.Fatalf("sample value %v: %v", s.Value, err)
	}
	return f
}

// promServer is a Prometheus process run by a test.
type promServer struct {
	base   string
	client *http.Client
	out    *syncBuffer
	exited chan struct{}
}

// query runs an instant PromQL query through the HTTP API.
func (p *promServer) query(ctx context.Context, q string) ([]promSample, error) {
	req, err := http.NewRequestWithContext(ctx, "GET", p.base+"/api/v1/query?query="+url.QueryEscape(q), nil)
	if err != nil {
		return nil, err
	}
	resp, err := p.client.Do(req)
	if err != nil {
		return nil, err
	}
	defer resp.Body.Close()
	var r struct {
		Status string `json:"status"`
		Error  string `json:"error"`
		Data   struct {
			ResultType string       `json:"resultType"`
			Result     []promSample `json:"result"`
		} `json:"data"`
	}
	if err := json.NewDecoder(resp.Body).Decode(&r); err != nil {
		return nil, fmt.Errorf("query %s: %w", q, err)
	}
	if r.Status != "success" || r.Data.ResultType != "vector" {
		return nil, fmt.Errorf("query %s: %s %s (%s)", q, r.Status, r.Error, r.Data.ResultType)
	}
	return r.Data.Result, nil
}

// waitFor polls cond every 100 ms until it is true, the process exits or
// the context ends.
func (p *promServer) waitFor(ctx context.Context, t *testing.T, what string, cond func() (bool, string)) {
	t.Helper()
	tick := time.NewTicker(100 * time.Millisecond)
	defer tick.Stop()
	last := ""
	for {
		ok, state := cond()
		if ok {
			return
		}
		last = state
		select {
		case <-ctx.Done():
			t.Fatalf("waiting for %s: %v; last: %s\nprometheus output:\n%s", what, ctx.Err(), last, p.out.String())
		case <-p.exited:
			t.Fatalf("waiting for %s: prometheus exited; last: %s\noutput:\n%s", what, last, p.out.String())
		case <-tick.C:
		}
	}
}

// startPrometheus runs the prometheus binary on loopback, scraping target
// every second with the rules of testdata/rules.yml, and kills it when the
// test ends.
func startPrometheus(t *testing.T, ctx context.Context, bin, target string) *promServer {
	t.Helper()
	dir := t.TempDir()
	rules, err := filepath.Abs(filepath.Join("testdata", "rules.yml"))
	if err != nil {
		t.Fatal(err)
	}
	cfg := fmt.Sprintf(`global:
  scrape_interval: 1s
  scrape_timeout: 1s
  evaluation_interval: 1s
rule_files:
  - %q
scrape_configs:
  - job_name: packwatch
    static_configs:
      - targets: [%q]
`, rules, target)
	cfgPath := filepath.Join(dir, "prometheus.yml")
	if err := os.WriteFile(cfgPath, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	addr := fmt.Sprintf("127.0.0.1:%d", freePort(t))
	cmd := exec.Command(bin,
		"--config.file="+cfgPath,
		"--storage.tsdb.path="+filepath.Join(dir, "data"),
		"--web.listen-address="+addr,
		"--log.level=warn",
	)
	p := &promServer{
		base:   "http://" + addr,
		client: &http.Client{Transport: &http.Transport{}, Timeout: 5 * time.Second},
		out:    &syncBuffer{},
		exited: make(chan struct{}),
	}
	cmd.Stdout, cmd.Stderr = p.out, p.out
	if err := cmd.Start(); err != nil {
		t.Fatalf("start %s: %v", bin, err)
	}
	done := make(chan struct{})
	go func() {
		cmd.Wait()
		close(p.exited)
		close(done)
	}()
	t.Cleanup(func() {
		cmd.Process.Kill()
		<-done
		p.client.CloseIdleConnections()
	})
	p.waitFor(ctx, t, "/-/ready", func() (bool, string) {
		req, _ := http.NewRequestWithContext(ctx, "GET", p.base+"/-/ready", nil)
		resp, err := p.client.Do(req)
		if err != nil {
			return false, err.Error()
		}
		io.Copy(io.Discard, resp.Body)
		resp.Body.Close()
		return resp.StatusCode == http.StatusOK, resp.Status
	})
	return p
}

// TestPrometheusScrape runs a real Prometheus server (the Debian package
// prometheus) against the handler over two packs of a real engine, and asks
// it, through its HTTP API, for the lowest cell margin per pack: one series
// per pack, with the margins /api/state gives. The example rules of
// testdata/rules.yml (the README's) are loaded too and must record the same
// margins and raise the expected alerts.
func TestPrometheusScrape(t *testing.T) {
	bin, err := exec.LookPath("prometheus")
	if err != nil {
		skipOrFail(t, "prometheus not found in PATH (Debian package prometheus): "+err.Error())
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
	prom := startPrometheus(t, ctx, bin, strings.TrimPrefix(srv.URL, "http://"))

	check := func(q string) {
		t.Helper()
		var res []promSample
		prom.waitFor(ctx, t, q, func() (bool, string) {
			res, err = prom.query(ctx, q)
			if err != nil {
				return false, err.Error()
			}
			return len(res) == 2, fmt.Sprintf("%d series", len(res))
		})
		sort.Slice(res, func(i, j int) bool { return res[i].Metric["pack"] < res[j].Metric["pack"] })
		for _, s := range res {
			id := s.Metric["pack"]
			w, ok := want[id]
			if !ok || !near(s.float(t), w, 1e-9) {
				t.Errorf("%s: pack %q lowest cell margin %v, want %v", q, id, s.float(t), w)
			}
		}
	}
	check(`min by (pack) (packwatch_limit_margin_volts{limit=~"cell_low|cell_high"})`)
	check(`pack:cell_margin_volts:min`) // the README's recording rule

	alerts := func(name string) func() (bool, string) {
		return func() (bool, string) {
			res, err := prom.query(ctx, `ALERTS{alertname="`+name+`"}`)
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
	prom.waitFor(ctx, t, "alert PackCellMarginLow", alerts("PackCellMarginLow"))
	if _, got := alerts("PackCellMarginLow")(); got != packB+"/" {
		t.Errorf("PackCellMarginLow for %q, want %s only", got, packB)
	}
	// A's console has been silent for 15 s of data time; B's has never sent
	// anything, so it has no age (PackSourceNeverHeard covers it).
	prom.waitFor(ctx, t, "alert PackSourceSilent", alerts("PackSourceSilent"))
	if _, got := alerts("PackSourceSilent")(); got != packA+"/console" {
		t.Errorf("PackSourceSilent for %q, want %s/console only", got, packA)
	}
}
