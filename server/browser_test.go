package server

import (
	"context"
	"encoding/json"
	"flag"
	"fmt"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"packwatch/pack"
)

var shotsDir = flag.String("shots", "", "directory for the browser test's screenshots (default: a temporary directory)")

// findChromium looks for a Chromium or Chrome binary.
func findChromium() string {
	for _, name := range []string{"chromium", "chromium-browser", "google-chrome", "google-chrome-stable"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	return ""
}

// browser starts headless Chromium at the given window size; it skips the
// test (or fails it with PACKWATCH_NO_SKIP=1) when none is installed.
func browser(t *testing.T, w, h int) (context.Context, context.CancelFunc) {
	t.Helper()
	bin := findChromium()
	if bin == "" {
		if noSkip() {
			t.Fatal("chromium not found and PACKWATCH_NO_SKIP=1 (install it: apt-get install -y chromium)")
		}
		t.Skip("chromium not found: install it (apt-get install -y chromium) to run the browser test")
	}
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(bin),
		chromedp.Flag("headless", true),
		chromedp.Flag("no-sandbox", true),
		chromedp.Flag("disable-gpu", true),
		chromedp.Flag("disable-dev-shm-usage", true),
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("no-first-run", true),
		chromedp.Flag("hide-scrollbars", true),
		chromedp.Flag("mute-audio", true),
		chromedp.WindowSize(w, h),
		chromedp.UserDataDir(t.TempDir()),
	}
	actx, acancel := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancel := chromedp.NewContext(actx)
	ctx, tcancel := context.WithTimeout(ctx, 3*time.Minute) // an upper bound on a loaded machine, not a speed check
	return ctx, func() { tcancel(); cancel(); acancel() }
}

func shotPath(t *testing.T, name string) string {
	dir := *shotsDir
	if dir == "" {
		dir = t.TempDir()
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatalf("screenshot dir: %v", err)
	}
	return filepath.Join(dir, name)
}

func getState(t *testing.T, base string) *pack.Snapshot {
	t.Helper()
	resp, err := http.Get(base + "/api/state")
	if err != nil {
		t.Fatalf("GET /api/state: %v", err)
	}
	defer resp.Body.Close()
	var s pack.Snapshot
	if err := json.NewDecoder(resp.Body).Decode(&s); err != nil {
		t.Fatalf("decode /api/state: %v", err)
	}
	return &s
}

// TestBrowserEndToEnd loads the page in headless Chromium against the fake
// engine: the cell bars show the numbers /api/state has at the page's
// data-seq, a cell pushed past its limit raises the alarm element (and it can
// be acknowledged through the Origin-checked POST), and a stopped server
// turns the page NOT LIVE.
func TestBrowserEndToEnd(t *testing.T) {
	tStart := time.Now()
	ctx, cancel := browser(t, 1400, 900)
	defer cancel()
	defer func() { t.Logf("browser test took %v", time.Since(tStart).Round(time.Millisecond)) }()

	eng := newFakeEngine(48, 8)
	r := startServer(t, Options{Engine: eng, BusView: fakeBus, Tick: 100 * time.Millisecond, Version: "test"})

	allNumbers := `(() => { const v = [...document.querySelectorAll('#cell-bars .cell .cv')]; return v.length === 48 && v.every(e => /^\d+\.\d{3}$/.test(e.textContent)); })()`
	t0 := time.Now()
	if err := chromedp.Do(ctx, chromedp.EmulateViewport(1400, 900), chromedp.Navigate(r.base+"/")); err != nil {
		t.Fatalf("navigate: %v", err)
	}
	t.Logf("browser start and page load: %v", time.Since(t0).Round(time.Millisecond))
	waitJS(t, ctx, "48 cell voltages shown", allNumbers, 30*time.Second)

	// Freeze the data, then compare the page with /api/state at the same seq.
	eng.setPaused(true)
	want := getState(t, r.base)
	waitJS(t, ctx, fmt.Sprintf("page at seq %d", want.Seq), fmt.Sprintf(`document.documentElement.dataset.seq === "%d"`, want.Seq), 30*time.Second)
	shown := evalJS[[]string](t, ctx, `[...document.querySelectorAll('#cell-bars .cell .cv')].map(e => e.textContent)`)
	if seqAttr := evalJS[string](t, ctx, `document.documentElement.getAttribute('data-seq')`); seqAttr != strconv.FormatUint(want.Seq, 10) {
		t.Fatalf("data-seq = %s, want %d", seqAttr, want.Seq)
	}
	cells := want.Packs[0].Cells
	if len(shown) != len(cells) {
		t.Fatalf("page shows %d cells, /api/state has %d", len(shown), len(cells))
	}
	for i, c := range cells {
		if w := fmt.Sprintf("%.3f", float64(*c.V)); shown[i] != w {
			t.Errorf("cell %d: page shows %q, /api/state has %s", c.N, shown[i], w)
		}
	}
	// The min and max cells are marked in text, not only by colour.
	st := want.Packs[0].CellStats
	minTag := evalJS[string](t, ctx, fmt.Sprintf(`document.querySelector('#cell-bars .cell[data-n="%d"] .tag').textContent`, st.MinCell))
	maxTag := evalJS[string](t, ctx, fmt.Sprintf(`document.querySelector('#cell-bars .cell[data-n="%d"] .tag').textContent`, st.MaxCell))
	if !strings.Contains(minTag, "▼") || !strings.Contains(maxTag, "▲") {
		t.Errorf("min/max tags: cell %d %q, cell %d %q", st.MinCell, minTag, st.MaxCell, maxTag)
	}
	screenshot(t, ctx, "dashboard-1400x900.png")
	screenshot(t, ctx, "full-dashboard-1400.png")

	// A cell past its limit: the alarm element appears, with the cell's trip cue.
	eng.setOver(5)
	eng.setPaused(false)
	waitJS(t, ctx, "trip alarm element", `(() => { const a = document.querySelector('#alarm-list li.lv-trip.active'); return !!a && a.textContent.includes('Cell high') && a.textContent.includes('cell 5'); })()`, 30*time.Second)
	if tag := evalJS[string](t, ctx, `document.querySelector('#cell-bars .cell[data-n="5"] .tag').textContent`); !strings.Contains(tag, "TRIP") {
		t.Errorf("cell 5 tag = %q, want the word TRIP beside the colour", tag)
	}
	if title := evalJS[string](t, ctx, `document.title`); !strings.HasPrefix(title, "TRIP") {
		t.Errorf("title = %q, want the worst state TRIP first", title)
	}
	screenshot(t, ctx, "dashboard-trip-1400x900.png")

	// Until the first touch or click, the page says the sound is not armed.
	if snd := evalJS[string](t, ctx, `document.getElementById('sound').textContent`); !strings.Contains(snd, "not armed") {
		t.Errorf("sound button before any touch = %q, want it to say not armed", snd)
	}

	// Acknowledge through the page (POST with the page's own Origin).
	if err := chromedp.Do(ctx, chromedp.Click(chromedp.CSS(`#alarm-list li.lv-trip .ack`))); err != nil {
		t.Fatalf("click acknowledge: %v", err)
	}
	waitJS(t, ctx, "alarm shown acknowledged", `!!document.querySelector('#alarm-list li.lv-trip.acked')`, 30*time.Second)
	// That click was the first touch: the sound is armed now, and can be muted.
	waitJS(t, ctx, "sound armed", `document.getElementById('sound').textContent.startsWith('Sound on')`, 30*time.Second)
	if err := chromedp.Do(ctx, chromedp.Click(chromedp.CSS(`#sound`))); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "sound muted", `document.getElementById('sound').textContent.startsWith('Sound muted')`, 30*time.Second)
	eng.mu.Lock()
	if !eng.acked[1] {
		t.Error("engine did not record the acknowledgement")
	}
	eng.mu.Unlock()

	// Pre-charge: the main contactor closing with the load side below 90 %
	// of pack voltage raises the warning (common practice, no source).
	eng.setPrecharge(0.6, false)
	waitJS(t, ctx, "pre-charge at 60 %", `document.getElementById('pre-pct').textContent.startsWith('60') && document.getElementById('pre-warn').hidden`, 30*time.Second)
	eng.setPrecharge(0.6, true)
	waitJS(t, ctx, "early-close warning", `(() => { const w = document.getElementById('pre-warn'); return !w.hidden && w.textContent.includes('60') && w.textContent.includes('below 90'); })()`, 30*time.Second)

	// The bus view: opened, it subscribes and lists every ID, unknown ones marked.
	if err := chromedp.Do(ctx, chromedp.Click(chromedp.CSS(`#bus summary`))); err != nil {
		t.Fatalf("open bus view: %v", err)
	}
	waitJS(t, ctx, "bus view rows", `(() => { const u = document.querySelector('#bus-body tr.unknown'); const rows = document.querySelectorAll('#bus-body tbody tr'); return rows.length === 2 && !!u && u.textContent.includes('0x7FF') && u.textContent.includes('unknown') && document.getElementById('bus-body').textContent.includes('bus load 23.5'); })()`, 30*time.Second)
	screenshot(t, ctx, "dashboard-bus-1400x900.png")

	// Outdoor theme: black on white for sunlight.
	if err := chromedp.Do(ctx, chromedp.Click(chromedp.CSS(`#theme`))); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "outdoor theme", `document.documentElement.dataset.theme === 'outdoor' && getComputedStyle(document.documentElement).backgroundColor === 'rgb(255, 255, 255)'`, 30*time.Second)
	screenshot(t, ctx, "dashboard-outdoor-1400x900.png")
	if err := chromedp.Do(ctx, chromedp.Click(chromedp.CSS(`#theme`))); err != nil {
		t.Fatal(err)
	}

	// Phone width: nothing wider than the screen.
	if err := chromedp.Do(ctx, chromedp.EmulateViewport(390, 844, chromedp.EmulateMobile)); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "page fits 390 px", `document.documentElement.scrollWidth <= 390`, 30*time.Second)
	screenshot(t, ctx, "dashboard-phone-390x844.png")
	screenshot(t, ctx, "full-dashboard-phone-390.png")
	if err := chromedp.Do(ctx, chromedp.EmulateViewport(1400, 900)); err != nil {
		t.Fatal(err)
	}

	// A pack with nothing known (null lists and numbers) still renders: the
	// page sets data-seq only after a whole render, so a seq that keeps
	// advancing means no renderer threw.
	eng.mu.Lock()
	eng.empty = true
	emptyFrom := eng.seq + 1
	eng.mu.Unlock()
	waitJS(t, ctx, "an empty pack rendered", fmt.Sprintf(`Number(document.documentElement.dataset.seq) > %d && document.getElementById('soc-pct').textContent.startsWith('--') && document.querySelectorAll('#cell-bars .cell').length === 0`, emptyFrom+2), 30*time.Second)
	eng.mu.Lock()
	eng.empty = false
	eng.mu.Unlock()

	// Two packs: a tab each with its state; the title keeps the worst.
	eng.mu.Lock()
	eng.twoPacks = true
	eng.mu.Unlock()
	waitJS(t, ctx, "two pack tabs", `document.querySelectorAll('#packs .packtab').length === 2 && document.querySelectorAll('#packs .packtab')[1].textContent.includes('Test pack B') && document.querySelectorAll('#packs .pt-detail')[1].textContent.startsWith('SOC ') && !document.querySelectorAll('#packs .pt-detail')[1].hidden`, 30*time.Second)
	if err := chromedp.Do(ctx, chromedp.Click(chromedp.CSS(`#packs .packtab:nth-child(2)`))); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "pack B shown", `document.querySelectorAll('#cell-bars .cell').length === 16 && document.querySelector('#packs .packtab.sel').textContent.includes('Test pack B') && document.title.startsWith('TRIP')`, 30*time.Second)
	if err := chromedp.Do(ctx, chromedp.Click(chromedp.CSS(`#packs .packtab:nth-child(1)`))); err != nil {
		t.Fatal(err)
	}
	waitJS(t, ctx, "pack A shown again", `document.querySelectorAll('#cell-bars .cell').length === 48`, 30*time.Second)
	eng.mu.Lock()
	eng.twoPacks = false
	eng.mu.Unlock()

	// Demo data is watermarked wherever values show.
	eng.mu.Lock()
	eng.mode = "simulated"
	eng.mu.Unlock()
	waitJS(t, ctx, "demo mode shown", `document.documentElement.dataset.mode === 'simulated' && !document.getElementById('mode').hidden`, 30*time.Second)
	for _, sel := range []string{".cells", ".soc", ".margins", ".charts", ".temps", ".alarms"} {
		mark := evalJS[string](t, ctx, fmt.Sprintf(`getComputedStyle(document.querySelector('%s'), '::after').content`, sel))
		if !strings.Contains(mark, "DEMO") {
			t.Errorf("panel %s watermark = %q, want DEMO", sel, mark)
		}
	}
	screenshot(t, ctx, "dashboard-demo-1400x900.png")

	// Stop the server: the page must say NOT LIVE with the age of its data.
	t0 = time.Now()
	r.stop(t)
	t.Logf("server stopped in %v", time.Since(t0))
	waitJS(t, ctx, "NOT LIVE", `(() => { const n = document.getElementById('notlive'); return !n.hidden && n.textContent.includes('NOT LIVE') && n.textContent.includes('old') && document.documentElement.dataset.live === 'no'; })()`, 30*time.Second)
	screenshot(t, ctx, "dashboard-notlive-1400x900.png")
}

// waitJS polls a JavaScript condition in the page until it is true.
func waitJS(t *testing.T, ctx context.Context, what, cond string, within time.Duration) {
	t.Helper()
	t0 := time.Now()
	defer func() { t.Logf("waited %v for %s", time.Since(t0).Round(time.Millisecond), what) }()
	if _, err := chromedp.Run(ctx, chromedp.Poll[bool](cond, chromedp.WithPollingTimeout(within))); err != nil {
		t.Fatalf("waiting for %s: %v", what, err)
	}
}

// evalJS evaluates an expression in the page.
func evalJS[T any](t *testing.T, ctx context.Context, expr string) T {
	t.Helper()
	v, err := chromedp.Run(ctx, chromedp.Evaluate[T](expr))
	if err != nil {
		t.Fatalf("evaluate %s: %v", expr, err)
	}
	return v
}

// screenshot saves the viewport; a name starting "full-" saves the whole
// page. Without -shots only the trip view is captured (into a temporary
// directory), to keep the test quick.
func screenshot(t *testing.T, ctx context.Context, name string) {
	t.Helper()
	if *shotsDir == "" && name != "dashboard-trip-1400x900.png" {
		return
	}
	act := chromedp.CaptureScreenshot()
	if strings.HasPrefix(name, "full-") {
		if *shotsDir == "" {
			return // whole-page shots only for review (-shots DIR)
		}
		act = chromedp.FullScreenshot(100)
	}
	t0 := time.Now()
	buf, err := chromedp.Run(ctx, act)
	defer func() { t.Logf("screenshot %s took %v", name, time.Since(t0)) }()
	if err != nil {
		t.Fatalf("screenshot %s: %v", name, err)
	}
	p := shotPath(t, name)
	if err := os.WriteFile(p, buf, 0o644); err != nil {
		t.Fatalf("write %s: %v", p, err)
	}
	t.Logf("screenshot: %s", p)
}

// TestBrowserReplay: in replay mode the page shows the replay controls and
// marks every panel; its buttons reach the Replay through same-origin POSTs.
func TestBrowserReplay(t *testing.T) {
	ctx, cancel := browser(t, 1400, 900)
	defer cancel()
	eng := newFakeEngine(16, 4)
	eng.mode = "replay"
	rp := &fakeReplay{}
	r := startServer(t, Options{Engine: eng, Mode: "replay", Replay: rp})
	if err := chromedp.Do(ctx, chromedp.EmulateViewport(1400, 900), chromedp.Navigate(r.base+"/")); err != nil {
		t.Fatalf("navigate: %v", err)
	}
	waitJS(t, ctx, "replay page", `!document.getElementById('replay').hidden && document.getElementById('mode').textContent.includes('REPLAY') && document.getElementById('live').textContent.includes('REPLAY') && document.querySelectorAll('#cell-bars .cell').length === 16`, 30*time.Second)
	if mark := evalJS[string](t, ctx, `getComputedStyle(document.querySelector('.cells'), '::after').content`); !strings.Contains(mark, "REPLAY") {
		t.Errorf("cells watermark %q, want REPLAY", mark)
	}
	if err := chromedp.Do(ctx,
		chromedp.Click(chromedp.CSS(`#replay [data-replay="pause"]`)),
		chromedp.SetValue(chromedp.CSS(`#replay-seek`), "120"),
		chromedp.Click(chromedp.CSS(`#replay [data-replay="seek"]`)),
	); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "pause and seek reached the replay", 30*time.Second, func() bool { return rp.called() == "pause,seek 2m0s" })
	screenshot(t, ctx, "dashboard-replay-1400x900.png")
}
