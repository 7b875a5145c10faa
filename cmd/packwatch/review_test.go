package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"net/http"
	"os"
	"os/exec"
	"packwatch/record"
	"path/filepath"
	"reflect"
	"sort"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"packwatch/pack"
)

// TestReviewPage records a demo session that holds a full charge and a
// discharge from full, replays it, and checks the review page's API against
// the CLI on the same file: report.json equals `report --json`, export.csv
// equals `export --every 1s`, and the series hold the per-second chart
// table. Then headless Chromium shows the page and its discharge capacity
// must be report.json's.
func TestReviewPage(t *testing.T) {
	db := filepath.Join(t.TempDir(), "review.db")
	ctx, cancel := context.WithCancel(context.Background())
	url, _, errb, code := startCLI(t, ctx, "demo", "--addr", "127.0.0.1:0", "--speed", "5000", "--scenario", "generic", "--record", db)
	first := waitState(t, url, func(s *pack.Snapshot) bool { return len(s.Packs) == 1 && s.Packs[0].CellStats.Reporting == 12 })
	// the generic story discharges from full between about 11,500 s and
	// 28,500 s of data time; each wait is bounded by waitState's deadline
	waitState(t, url, func(s *pack.Snapshot) bool { return float64(s.DataT) > float64(first.DataT)+15000 })
	waitState(t, url, func(s *pack.Snapshot) bool { return float64(s.DataT) > float64(first.DataT)+30000 })
	cancel()
	if c := <-code; c != 0 {
		t.Fatalf("demo exit %d: %s", c, errb.String())
	}

	c, want, errOut := runCLI(t, "report", db, "--json")
	if c != 0 {
		t.Fatalf("report --json: exit %d: %s", c, errOut)
	}
	c, wantCSV, errOut := runCLI(t, "export", db, "--every", "1s")
	if c != 0 {
		t.Fatalf("export: exit %d: %s", c, errOut)
	}

	ctx2, cancel2 := context.WithCancel(context.Background())
	defer func() {
		cancel2()
		if c := <-code; c != 0 {
			t.Errorf("replay exit %d: %s", c, errb.String())
		}
	}()
	url, _, errb, code = startCLI(t, ctx2, "replay", db, "--addr", "127.0.0.1:0")
	get := func(path string) (string, http.Header) {
		t.Helper()
		resp, err := http.Get(url + path)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, err := io.ReadAll(resp.Body)
		if err != nil || resp.StatusCode != 200 {
			t.Fatalf("GET %s: %d %v: %s", path, resp.StatusCode, err, b)
		}
		return string(b), resp.Header
	}

	got, _ := get("api/review/report.json")
	var gm, wm map[string]any
	if err := json.Unmarshal([]byte(got), &gm); err != nil {
		t.Fatalf("report.json: %v", err)
	}
	if err := json.Unmarshal([]byte(want), &wm); err != nil {
		t.Fatalf("report --json: %v", err)
	}
	keys := make([]string, 0, len(wm))
	for k := range wm {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		if !reflect.DeepEqual(gm[k], wm[k]) {
			t.Errorf("report.json field %q differs from report --json", k)
		}
	}
	if len(gm) != len(wm) {
		t.Errorf("report.json has %d fields, report --json %d", len(gm), len(wm))
	}
	if got != want {
		t.Errorf("report.json is not byte for byte what report --json prints (%d vs %d bytes)", len(got), len(want))
	}
	capAh, ok := wm["discharge_capacity_ah"].(float64)
	if !ok {
		t.Fatalf("the recording holds no discharge from full (discharge_capacity_ah %v): the demo story changed?", wm["discharge_capacity_ah"])
	}

	csv, hdr := get("api/review/export.csv")
	if csv != wantCSV {
		t.Errorf("export.csv (%d bytes) differs from export --every 1s (%d bytes)", len(csv), len(wantCSV))
	}
	if !strings.Contains(hdr.Get("Content-Disposition"), "attachment") {
		t.Errorf("export.csv is not a download: %q", hdr.Get("Content-Disposition"))
	}
	page, hdr := get("api/review/report.html")
	if !strings.Contains(hdr.Get("Content-Disposition"), "review-report.html") || !strings.Contains(page, "never the protection") {
		t.Errorf("report.html: disposition %q, %d bytes without the safety text", hdr.Get("Content-Disposition"), len(page))
	}

	body, _ := get("api/review/series")
	var ser struct {
		T       []float64 `json:"t_s"`
		Columns []struct {
			Key    string     `json:"key"`
			Values []*float64 `json:"values"`
		} `json:"columns"`
	}
	if err := json.Unmarshal([]byte(body), &ser); err != nil {
		t.Fatalf("series: %v", err)
	}
	col := map[string][]*float64{}
	for _, c := range ser.Columns {
		if len(c.Values) != len(ser.T) {
			t.Errorf("series %s: %d values for %d seconds", c.Key, len(c.Values), len(ser.T))
		}
		col[c.Key] = c.Values
	}
	for _, k := range []string{"pack.voltage", "pack.current", "cell.min", "cell.max", "temp[1]"} {
		if col[k] == nil {
			t.Errorf("series lacks %s: %v", k, ser.Columns)
		}
	}
	// one point per second of the chart table, in order: every second the
	// recording holds for pack.voltage is there, and no more than the
	// recording's length (at the test's 5000× the recorder may shed chart
	// rows; the raw messages stay complete)
	rd, err := record.Open(db)
	if err != nil {
		t.Fatal(err)
	}
	pv, err := rd.Stats("pack.voltage", math.MinInt64, math.MaxInt64)
	firstT, _, _, _ := rd.Span()
	rd.Close()
	if err != nil || len(pv) == 0 {
		t.Fatalf("chart table: %d pack.voltage rows, %v", len(pv), err)
	}
	at := map[int64]bool{}
	for _, x := range ser.T {
		at[int64(math.Floor(x))] = true
	}
	for _, p := range pv {
		// series times count seconds from the first message
		x := int64(math.Floor(float64(p.Sec) - float64(firstT)/1e9))
		if !at[x] && !at[x+1] && !at[x-1] {
			t.Fatalf("series lacks the second at %d s that the chart table holds", x)
		}
	}
	if dur := wm["duration_s"].(float64); len(ser.T) < len(pv) || len(ser.T) > int(dur)+2 {
		t.Errorf("series: %d points, chart table %d, %.0f s of data", len(ser.T), len(pv), dur)
	}
	for i := 1; i < len(ser.T); i++ {
		if ser.T[i] <= ser.T[i-1] {
			t.Fatalf("series times not increasing at %d: %v, %v", i, ser.T[i-1], ser.T[i])
		}
	}
	for i := range ser.T {
		lo, hi := col["cell.min"][i], col["cell.max"][i]
		if lo != nil && hi != nil && *lo > *hi {
			t.Fatalf("second %d: lowest cell %v above highest %v", i, *lo, *hi)
		}
	}

	t.Run("browser", func(t *testing.T) {
		bin := ""
		for _, name := range []string{"chromium", "chromium-browser", "google-chrome"} {
			if p, err := exec.LookPath(name); err == nil {
				bin = p
				break
			}
		}
		if bin == "" {
			if os.Getenv("PACKWATCH_NO_SKIP") == "1" {
				t.Fatal("chromium not found and PACKWATCH_NO_SKIP=1 (apt-get install -y chromium)")
			}
			t.Skip("chromium not found: apt-get install -y chromium to run the browser test")
		}
		actx, acancel := chromedp.NewExecAllocator(context.Background(), chromedp.ExecPath(bin),
			chromedp.Flag("headless", true), chromedp.Flag("no-sandbox", true), chromedp.Flag("disable-gpu", true),
			chromedp.Flag("disable-dev-shm-usage", true), chromedp.Flag("disable-background-networking", true),
			chromedp.Flag("no-first-run", true), chromedp.Flag("mute-audio", true),
			chromedp.WindowSize(1400, 1000), chromedp.UserDataDir(t.TempDir()))
		defer acancel()
		bctx, bcancel := chromedp.NewContext(actx)
		defer bcancel()
		bctx, tcancel := context.WithTimeout(bctx, 3*time.Minute) // a bound on a loaded machine, not a speed check
		defer tcancel()
		// the replay page links to the review page
		if _, err := chromedp.Run(bctx, chromedp.Navigate(url)); err != nil {
			t.Fatalf("replay page: %v", err)
		}
		href, err := chromedp.Run(bctx, chromedp.Evaluate[string](`(document.querySelector('#replay a[href$="review.html"]') || {getAttribute: () => ""}).getAttribute('href')`))
		if err != nil || href == "" {
			t.Fatalf("the replay panel has no link to the review page: %v", err)
		}
		if _, err := chromedp.Run(bctx, chromedp.Navigate(url+strings.TrimPrefix(href, "/"))); err != nil {
			t.Fatal(err)
		}
		if _, err := chromedp.Run(bctx, chromedp.Poll[bool](`document.documentElement.dataset.state === 'ready' && document.querySelectorAll('#timeline-charts .uplot').length >= 4`, chromedp.WithPollingTimeout(time.Minute))); err != nil {
			msg, _ := chromedp.Run(bctx, chromedp.Evaluate[string](`document.getElementById('review-error').textContent`))
			t.Fatalf("review page not ready: %v %s", err, msg)
		}
		shown, err := chromedp.Run(bctx, chromedp.Evaluate[string](`document.getElementById('discharge-ah').textContent`))
		if err != nil {
			t.Fatal(err)
		}
		mode, err := chromedp.Run(bctx, chromedp.Evaluate[string](`document.querySelector('.review-mode').textContent`))
		if err != nil {
			t.Fatal(err)
		}
		if w := fmt.Sprintf("%.2f", capAh); strings.TrimSpace(shown) != w {
			t.Errorf("page shows discharge capacity %q, report.json %s", shown, w)
		}
		if !strings.Contains(mode, "REPLAY") {
			t.Errorf("page not marked REPLAY: %q", mode)
		}
		// PACKWATCH_REVIEW_SHOT=DIR writes a screenshot of every tab there
		if dir := os.Getenv("PACKWATCH_REVIEW_SHOT"); dir != "" {
			for _, tab := range []string{"timeline", "curve", "ica", "resistance", "bursts"} {
				if _, err := chromedp.Run(bctx, chromedp.Evaluate[bool](`document.querySelector('[data-tab="`+tab+`"]').click(), true`)); err != nil {
					t.Fatal(err)
				}
				png, err := chromedp.Run(bctx, chromedp.FullScreenshot(100))
				if err != nil {
					t.Fatal(err)
				}
				if err := os.WriteFile(filepath.Join(dir, "review-"+tab+".png"), png, 0o644); err != nil {
					t.Fatal(err)
				}
			}
		}
	})
}
