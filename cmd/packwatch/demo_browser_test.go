package main

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"packwatch/config"
	"packwatch/decode"
	"packwatch/pack"
	"packwatch/sim"
)

// TestDemoInBrowser drives the demo's real path (simulator → decoder →
// engine → hub → page) in headless Chromium: the cell numbers on the page
// match /api/state at the page's data-seq, a cell pushed past its limit
// through the simulator raises the alarm, and a stopped server turns the
// page NOT LIVE.
func TestDemoInBrowser(t *testing.T) {
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
	p, m, err := builtinPack(0, 1)
	if err != nil {
		t.Fatal(err)
	}
	simulator, err := sim.New(m, sim.Options{Speed: 20, Scenario: sim.BuoyWinchScenario(), Seed: 1})
	if err != nil {
		t.Fatal(err)
	}
	s, err := newSession([]*config.Profile{p}, []*decode.Map{m}, "simulated", nil, quiet)
	if err != nil {
		t.Fatal(err)
	}
	sctx, stop := context.WithCancel(context.Background())
	defer stop()
	var out syncBuffer
	done := make(chan error, 1)
	f := &serveFlags{addr: "127.0.0.1:0"}
	go func() {
		done <- runSession(sctx, s, f, "simulated", func(ctx context.Context) error { return simulator.Run(ctx, s) }, &out)
	}()
	url := waitURL(t, &out)

	actx, acancel := chromedp.NewExecAllocator(context.Background(), chromedp.ExecPath(bin),
		chromedp.Flag("headless", true), chromedp.Flag("no-sandbox", true), chromedp.Flag("disable-gpu", true),
		chromedp.Flag("disable-dev-shm-usage", true), chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("no-first-run", true), chromedp.Flag("mute-audio", true),
		chromedp.WindowSize(1400, 900), chromedp.UserDataDir(t.TempDir()))
	defer acancel()
	bctx, bcancel := chromedp.NewContext(actx)
	defer bcancel()
	bctx, tcancel := context.WithTimeout(bctx, 3*time.Minute) // a bound on a loaded machine, not a speed check
	defer tcancel()
	waitJS := func(what, js string) {
		t.Helper()
		if _, err := chromedp.Run(bctx, chromedp.Poll[bool](js, chromedp.WithPollingTimeout(time.Minute))); err != nil {
			t.Fatalf("waiting for %s: %v", what, err)
		}
	}
	if _, err := chromedp.Run(bctx, chromedp.Navigate(url)); err != nil {
		t.Fatal(err)
	}
	waitJS("12 cell voltages", `(() => { const v = [...document.querySelectorAll('#cell-bars .cell .cv')]; return v.length === 12 && v.every(e => /^\d\.\d{3}$/.test(e.textContent)); })()`)

	// freeze the simulator; the page must show what /api/state says at its seq
	simulator.Pause()
	var snap *pack.Snapshot
	var shown []string
	for tries := 0; ; tries++ {
		snap = waitState(t, url, func(*pack.Snapshot) bool { return true })
		waitJS("page at the same seq", fmt.Sprintf(`Number(document.documentElement.dataset.seq) >= %d`, snap.Seq))
		if shown, err = chromedp.Run(bctx, chromedp.Evaluate[[]string](`[...document.querySelectorAll('#cell-bars .cell .cv')].map(e => e.textContent)`)); err != nil {
			t.Fatal(err)
		}
		again := waitState(t, url, func(*pack.Snapshot) bool { return true })
		if cellsText(again) == cellsText(snap) || tries > 20 {
			break // the paused values held still around the page's read
		}
	}
	if strings.Join(shown, " ") != cellsText(snap) {
		t.Errorf("page shows %v, /api/state %s", shown, cellsText(snap))
	}
	// cell 7 past the 4.25 V limit: after trip_after (1 s of data time) the alarm shows
	if err := simulator.ForceCell(7, 4.40); err != nil {
		t.Fatal(err)
	}
	simulator.Resume()
	waitJS("the trip alarm for cell 7", `[...document.querySelectorAll('#alarm-list li')].some(li => li.textContent.includes('cell 7')) && document.title.startsWith('TRIP')`)

	// stop the server: the page must say NOT LIVE
	stop()
	if err := <-done; err != nil {
		t.Fatalf("session: %v", err)
	}
	waitJS("NOT LIVE", `document.getElementById('live').textContent.includes('NOT LIVE')`)
}

// cellsText is the cell voltages of a snapshot as the page prints them.
func cellsText(s *pack.Snapshot) string {
	var v []string
	for _, c := range s.Packs[0].Cells {
		if c.V == nil {
			v = append(v, "--")
			continue
		}
		v = append(v, fmt.Sprintf("%.3f", float64(*c.V)))
	}
	return strings.Join(v, " ")
}
