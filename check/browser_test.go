package check

import (
	"context"
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"packwatch/config"
	"packwatch/pack"
	"packwatch/sim"
)

// panelPage is a minimal page holding the check panel as the dashboard does.
const panelPage = `<!doctype html><html><head><meta charset="utf-8"><title>check panel</title>
<link rel="stylesheet" href="/static/check.css"><script src="/static/check.js" defer></script></head>
<body><section id="check-panel" class="panel"></section></body></html>`

func findChromium() string {
	for _, name := range []string{"chromium", "chromium-browser", "google-chrome", "google-chrome-stable"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	return ""
}

func waitJS(t *testing.T, ctx context.Context, what, expr string) {
	t.Helper()
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](expr, chromedp.WithPollingTimeout(60*time.Second))); err != nil {
		t.Fatalf("waiting for %s: %v", what, err)
	}
}

// TestBrowserPanel drives web/static/check.js in headless Chromium against
// the handler and a simulated pack: run a check (no-go while the checklist is
// unticked), tick both items (the banner turns go), save, and find the result
// in the panel's history list and in the history file.
func TestBrowserPanel(t *testing.T) {
	bin := findChromium()
	if bin == "" {
		if os.Getenv("PACKWATCH_NO_SKIP") == "1" {
			t.Fatal("chromium not found and PACKWATCH_NO_SKIP=1 (install it: apt-get install -y chromium)")
		}
		t.Skip("chromium not found: install it (apt-get install -y chromium) to run the browser test")
	}
	p, m := loadPod(t)
	s, err := sim.New(m, sim.Options{Speed: sim.SpeedMax, Scenario: restScenario(), Start: simStart, Seed: 7, For: 60 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	var gen sliceSink
	if err := s.Run(context.Background(), &gen); err != nil {
		t.Fatal(err)
	}
	tap := NewRawTap(0, SourceNames(p))
	eng := pack.NewEngine(pack.Options{Mode: "simulated", RawSink: RawTee{tap}})
	if err := eng.AddPack("pod", m, nil); err != nil {
		t.Fatal(err)
	}
	f := &feeder{eng: eng, msgs: gen.msgs, t: simStart.UnixNano(), wall: simStart}
	f.advance(15 * time.Second)
	hist, err := OpenHistory(filepath.Join(t.TempDir(), "checks.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer hist.Close()
	h, err := NewHandler(HandlerOptions{Engine: eng, History: hist, Raw: tap, Mode: ModeSimulated,
		Profile: func(id string) *config.Profile {
			if id == "pod" {
				return p
			}
			return nil
		},
		Now: func() time.Time { return f.wall }, After: f.after})
	if err != nil {
		t.Fatal(err)
	}
	mux := http.NewServeMux()
	mux.Handle("/api/check/", h)
	mux.HandleFunc("GET /api/state", func(w http.ResponseWriter, _ *http.Request) {
		json.NewEncoder(w).Encode(eng.Snapshot(time.Now()))
	})
	mux.Handle("GET /static/", http.StripPrefix("/static/", http.FileServer(http.Dir("../web/static"))))
	mux.HandleFunc("GET /{$}", func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "text/html; charset=utf-8")
		w.Write([]byte(panelPage))
	})
	srv := httptest.NewServer(mux)
	defer srv.Close()

	actx, acancel := chromedp.NewExecAllocator(context.Background(),
		chromedp.ExecPath(bin), chromedp.Flag("headless", true), chromedp.Flag("no-sandbox", true),
		chromedp.Flag("disable-gpu", true), chromedp.Flag("disable-dev-shm-usage", true),
		chromedp.Flag("disable-background-networking", true), chromedp.Flag("no-first-run", true),
		chromedp.UserDataDir(t.TempDir()))
	defer acancel()
	ctx, cancel := chromedp.NewContext(actx)
	defer cancel()
	ctx, tcancel := context.WithTimeout(ctx, 2*time.Minute) // an upper bound on a loaded machine, not a speed check
	defer tcancel()

	if err := chromedp.Do(ctx, chromedp.Navigate(srv.URL+"/")); err != nil {
		t.Fatalf("navigate: %v", err)
	}
	waitJS(t, ctx, "pack listed", `document.querySelectorAll('#check-pack option').length === 1`)
	if err := chromedp.Do(ctx,
		chromedp.SetValue(chromedp.CSS("#check-seconds"), "5"),
		chromedp.SendKeys(chromedp.CSS("#check-operator"), "B. Tester"),
		chromedp.Click(chromedp.CSS("#check-run")),
	); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "no-go before the checklist", `(() => { const b = document.getElementById('check-verdict'); return !!b && b.dataset.verdict === 'no-go'; })()`)
	waitJS(t, ctx, "rules shown, none failing", `document.querySelectorAll('.check-rules tr[data-rule]').length >= 10 && document.querySelectorAll('.check-rules tr.rule-fail, .check-rules tr.rule-no_data').length === 0`)
	if err := chromedp.Do(ctx,
		chromedp.Click(chromedp.CSS(`input.check-item[value="0"]`)),
		chromedp.Click(chromedp.CSS(`input.check-item[value="1"]`)),
	); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "go once ticked", `document.getElementById('check-verdict').dataset.verdict === 'go'`)
	if err := chromedp.Do(ctx,
		chromedp.SendKeys(chromedp.CSS("#check-note"), "before launch"),
		chromedp.Click(chromedp.CSS("#check-save")),
	); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "saved and listed", `!!document.querySelector('.check-saved') && document.querySelectorAll('#check-history tr[data-hash]').length === 1`)

	list, err := hist.List(context.Background(), "serial:POD-0007", 0)
	if err != nil || len(list) != 1 {
		t.Fatalf("history: %v %+v", err, list)
	}
	rec, err := hist.Get(context.Background(), list[0].Hash)
	if err != nil {
		t.Fatal(err)
	}
	if rec.Verdict != VerdictGo || rec.Operator != "B. Tester" || rec.Note != "before launch" || rec.Data.Seconds < 4 {
		t.Errorf("saved %s by %q note %q over %v s", rec.Verdict, rec.Operator, rec.Note, rec.Data.Seconds)
	}
	shown, err := chromedp.Run(ctx, chromedp.Evaluate[string](`document.querySelector('#check-history tr[data-hash]').dataset.hash`))
	if err != nil || shown != rec.Hash {
		t.Errorf("listed hash %q, saved %q (%v)", shown, rec.Hash, err)
	}
}
