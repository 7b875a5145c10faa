// Package promtest runs a real Prometheus server for tests: the Debian
// package's binary on loopback with a generated configuration, readiness
// polled on /-/ready, queried through its HTTP API and killed when the test
// ends. Only tests import it.
package promtest

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/url"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"sync"
	"testing"
	"time"
)

// SkipOrFail skips with the reason, or fails when PACKWATCH_NO_SKIP=1 (CI
// installs what the test needs).
func SkipOrFail(t *testing.T, reason string) {
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

// FreePort returns a loopback port that was free a moment ago.
func FreePort(t *testing.T) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// Sample is one element of an instant vector from the HTTP API.
type Sample struct {
	Metric map[string]string `json:"metric"`
	Value  [2]any            `json:"value"`
}

// Float is the sample's value.
func (s Sample) Float(t *testing.T) float64 {
	t.Helper()
	str, _ := s.Value[1].(string)
	f, err := strconv.ParseFloat(str, 64)
	if err != nil {
		t.Fatalf("sample value %v: %v", s.Value, err)
	}
	return f
}

// Server is a Prometheus process run by a test.
type Server struct {
	// Base is its URL, http://127.0.0.1:PORT.
	Base   string
	client *http.Client
	out    *syncBuffer
	exited chan struct{}
}

// Query runs an instant PromQL query through the HTTP API.
func (p *Server) Query(ctx context.Context, q string) ([]Sample, error) {
	req, err := http.NewRequestWithContext(ctx, "GET", p.Base+"/api/v1/query?query="+url.QueryEscape(q), nil)
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
			ResultType string   `json:"resultType"`
			Result     []Sample `json:"result"`
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

// WaitFor polls cond every 100 ms until it is true, the process exits or
// the context ends (then the test fails with Prometheus's output).
func (p *Server) WaitFor(ctx context.Context, t *testing.T, what string, cond func() (bool, string)) {
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

// Start runs the prometheus binary on loopback, scraping target (host:port,
// path /metrics) every second with the rule file rules (none when ""), and
// kills it when the test ends.
func Start(t *testing.T, ctx context.Context, bin, target, rules string) *Server {
	t.Helper()
	dir := t.TempDir()
	ruleFiles := ""
	if rules != "" {
		abs, err := filepath.Abs(rules)
		if err != nil {
			t.Fatal(err)
		}
		ruleFiles = fmt.Sprintf("rule_files:\n  - %q\n", abs)
	}
	cfg := fmt.Sprintf(`global:
  scrape_interval: 1s
  scrape_timeout: 1s
  evaluation_interval: 1s
%sscrape_configs:
  - job_name: packwatch
    static_configs:
      - targets: [%q]
`, ruleFiles, target)
	cfgPath := filepath.Join(dir, "prometheus.yml")
	if err := os.WriteFile(cfgPath, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	addr := fmt.Sprintf("127.0.0.1:%d", FreePort(t))
	cmd := exec.Command(bin,
		"--config.file="+cfgPath,
		"--storage.tsdb.path="+filepath.Join(dir, "data"),
		"--web.listen-address="+addr,
		"--log.level=warn",
	)
	p := &Server{
		Base:   "http://" + addr,
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
	p.WaitFor(ctx, t, "/-/ready", func() (bool, string) {
		req, _ := http.NewRequestWithContext(ctx, "GET", p.Base+"/-/ready", nil)
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
