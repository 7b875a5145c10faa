package main

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"net/http"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
	"packwatch/pack"
	"packwatch/record"
)

func mustLoad(t *testing.T, path string) (*config.Profile, *decode.Map) {
	t.Helper()
	p, m, err := loadProfile(path, io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	return p, m
}

var quiet = slog.New(slog.DiscardHandler)

// TestSessionSharedDevice: a device named by two profiles is opened once and
// mapped to each pack's own source.
func TestSessionSharedDevice(t *testing.T) {
	dir := t.TempDir()
	ex, err := os.ReadFile("../../config/examples/buoy-winch.toml")
	if err != nil {
		t.Fatal(err)
	}
	a := filepath.Join(dir, "a.toml")
	b := filepath.Join(dir, "b.toml")
	os.WriteFile(a, ex, 0o644)
	// b: the same CAN interface, a different console
	os.WriteFile(b, bytes.Replace(ex, []byte(`"/dev/ttyUSB0"`), []byte(`"/dev/ttyUSB1"`), 1), 0o644)
	pa, ma := mustLoad(t, a)
	pb, mb := mustLoad(t, b)
	s, err := newSession([]*config.Profile{pa, pb}, []*decode.Map{ma, mb}, "live", nil, quiet)
	if err != nil {
		t.Fatal(err)
	}
	if len(s.devices) != 3 {
		t.Fatalf("devices = %d, want 3 (can0 shared, two consoles)", len(s.devices))
	}
	if got := s.packs[1].srcMap; got[0] != 0 || got[1] != -1 || got[2] != 1 {
		t.Errorf("pack b srcMap = %v, want [0 -1 1]", got)
	}
	if s.packs[0].id == s.packs[1].id {
		t.Errorf("pack ids collide: %s", s.packs[0].id)
	}
}

// TestReload: a changed profile is swapped in; an invalid one leaves the old
// one running and shows its FILE:LINE:COL error in the snapshot.
func TestReload(t *testing.T) {
	dir := t.TempDir()
	ex, _ := os.ReadFile("../../config/examples/buoy-winch.toml")
	path := filepath.Join(dir, "pack.toml")
	os.WriteFile(path, ex, 0o644)
	p, m := mustLoad(t, path)
	s, err := newSession([]*config.Profile{p}, []*decode.Map{m}, "live", nil, quiet)
	if err != nil {
		t.Fatal(err)
	}
	r := newReloader(s, quiet)
	r.debounce = 10 * time.Millisecond
	done := make(chan error, 4)
	r.reloaded = func(_ string, err error) { done <- err }
	ctx, cancel := context.WithCancel(context.Background())
	defer func() { cancel(); r.wait() }()
	go r.run(ctx)
	<-r.watching

	wait := func() error {
		t.Helper()
		select {
		case err := <-done:
			return err
		case <-time.After(60 * time.Second):
			t.Fatal("no reload within 60 s of saving the profile")
			return nil
		}
	}
	// a valid change: a new name
	writeAtomic(t, path, bytes.Replace(ex, []byte(`name = "Buoy winch pack"`), []byte(`name = "Renamed pack"`), 1))
	if err := wait(); err != nil {
		t.Fatalf("valid reload: %v", err)
	}
	if got := s.eng.Snapshot(time.Now()).Packs[0].Name; got != "Renamed pack" {
		t.Errorf("name after reload = %q", got)
	}
	// an invalid change: a typo on line 6
	bad := bytes.Replace(ex, []byte("cells = 12"), []byte("celss = 12"), 1)
	writeAtomic(t, path, bad)
	if err := wait(); err == nil {
		t.Fatal("invalid profile reloaded without error")
	}
	snap := s.eng.Snapshot(time.Now()).Packs[0]
	if !regexp.MustCompile(`pack\.toml:6:1: unknown key`).MatchString(snap.ProfileError) {
		t.Errorf("profile error = %q", snap.ProfileError)
	}
	if snap.Name != "Renamed pack" {
		t.Errorf("old profile not kept: %q", snap.Name)
	}
}

// writeAtomic saves like an editor: write a temporary file, rename it over.
func writeAtomic(t *testing.T, path string, data []byte) {
	t.Helper()
	tmp := path + ".tmp"
	if err := os.WriteFile(tmp, data, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Rename(tmp, path); err != nil {
		t.Fatal(err)
	}
}

// syncBuffer is a bytes.Buffer safe for the server's banner goroutine.
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

// TestDemo runs the demo command end to end: the simulator drives the real
// decoder and engine, the page's API shows every cell, and Ctrl-C (context
// cancel) stops it cleanly with exit 0.
func TestDemo(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var out, errb syncBuffer
	code := make(chan int, 1)
	go func() { code <- run(ctx, []string{"demo", "--addr", "127.0.0.1:0", "--speed", "50"}, &out, &errb) }()
	url := ""
	re := regexp.MustCompile(`http://127\.0\.0\.1:\d+/`)
	deadline := time.Now().Add(30 * time.Second)
	var snap pack.Snapshot
	for time.Now().Before(deadline) {
		if url == "" {
			url = re.FindString(out.String())
			time.Sleep(20 * time.Millisecond)
			continue
		}
		resp, err := http.Get(url + "api/state")
		if err == nil {
			json.NewDecoder(resp.Body).Decode(&snap)
			resp.Body.Close()
			if len(snap.Packs) == 1 && snap.Packs[0].CellStats.Reporting == 12 {
				break
			}
		}
		time.Sleep(20 * time.Millisecond)
	}
	if len(snap.Packs) != 1 || snap.Packs[0].CellStats.Reporting != 12 {
		t.Fatalf("demo never showed 12 cells; stdout %q stderr %q", out.String(), errb.String())
	}
	if snap.Mode != "simulated" || !strings.Contains(out.String(), "SIMULATED") {
		t.Errorf("demo not marked simulated: mode %q", snap.Mode)
	}
	// the same session serves /metrics and the pre-flight check panel's API
	for path, want := range map[string]string{
		"metrics":                            `packwatch_cell_voltage_volts{cell="7",pack="buoy-winch"}`,
		"api/check/settings?pack=buoy-winch": `min_soc_pct`,
	} {
		resp, err := http.Get(url + path)
		if err != nil {
			t.Fatal(err)
		}
		body, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != 200 || !strings.Contains(string(body), want) {
			t.Errorf("GET /%s: %d, no %q in %.300s", path, resp.StatusCode, want, body)
		}
	}
	cancel()
	select {
	case c := <-code:
		if c != 0 {
			t.Errorf("exit %d: %s", c, errb.String())
		}
	case <-time.After(15 * time.Second):
		t.Fatal("demo did not stop after cancel")
	}
}

// startCLI runs a command in the background and waits until it prints its URL.
func startCLI(t *testing.T, ctx context.Context, args ...string) (url string, out, errb *syncBuffer, code chan int) {
	t.Helper()
	out, errb, code = &syncBuffer{}, &syncBuffer{}, make(chan int, 1)
	go func() { code <- run(ctx, args, out, errb) }()
	re := regexp.MustCompile(`http://127\.0\.0\.1:\d+/`)
	deadline := time.Now().Add(30 * time.Second)
	for url == "" && time.Now().Before(deadline) {
		select {
		case c := <-code:
			t.Fatalf("%v exited %d: %s", args, c, errb.String())
		case <-time.After(20 * time.Millisecond):
		}
		url = re.FindString(out.String())
	}
	if url == "" {
		t.Fatalf("%v printed no URL: %s", args, errb.String())
	}
	return url, out, errb, code
}

// waitURL waits until a session prints its dashboard URL.
func waitURL(t *testing.T, out *syncBuffer) string {
	t.Helper()
	re := regexp.MustCompile(`http://127\.0\.0\.1:\d+/`)
	for deadline := time.Now().Add(30 * time.Second); time.Now().Before(deadline); time.Sleep(20 * time.Millisecond) {
		if url := re.FindString(out.String()); url != "" {
			return url
		}
	}
	t.Fatalf("no URL printed: %q", out.String())
	return ""
}

// waitState polls /api/state until cond holds.
func waitState(t *testing.T, url string, cond func(*pack.Snapshot) bool) *pack.Snapshot {
	t.Helper()
	deadline := time.Now().Add(30 * time.Second)
	for time.Now().Before(deadline) {
		var snap pack.Snapshot
		if resp, err := http.Get(url + "api/state"); err == nil {
			json.NewDecoder(resp.Body).Decode(&snap)
			resp.Body.Close()
			if cond(&snap) {
				return &snap
			}
		}
		time.Sleep(20 * time.Millisecond)
	}
	t.Fatal("condition on /api/state not reached")
	return nil
}

// TestDemoRecordReplay: a demo session recorded, then replayed through the
// same dashboard path, and exported.
func TestDemoRecordReplay(t *testing.T) {
	db := filepath.Join(t.TempDir(), "demo.db")
	ctx, cancel := context.WithCancel(context.Background())
	url, _, errb, code := startCLI(t, ctx, "demo", "--addr", "127.0.0.1:0", "--speed", "200", "--record", db)
	first := waitState(t, url, func(s *pack.Snapshot) bool { return len(s.Packs) == 1 && s.Packs[0].CellStats.Reporting == 12 })
	waitState(t, url, func(s *pack.Snapshot) bool { return float64(s.DataT) > float64(first.DataT)+5 })
	cancel()
	if c := <-code; c != 0 {
		t.Fatalf("demo exit %d: %s", c, errb.String())
	}
	r, err := record.Open(db)
	if err != nil {
		t.Fatal(err)
	}
	binds, err := r.Binds()
	r.Close()
	if err != nil || !slices.Contains(binds, "cell[7].voltage") {
		t.Errorf("decimated chart table lacks cell[7].voltage: %v %v", binds, err)
	}
	code2, out, errOut := runCLI(t, "export", db, "--every", "1s", "--bind", "cell[7].voltage")
	rows := strings.Count(out, "\n")
	if code2 != 0 || rows < 5 {
		t.Fatalf("export: code %d, %d rows: %s", code2, rows, errOut)
	}

	ctx2, cancel2 := context.WithCancel(context.Background())
	defer cancel2()
	url, _, errb, code = startCLI(t, ctx2, "replay", db, "--speed", "10", "--addr", "127.0.0.1:0")
	snap := waitState(t, url, func(s *pack.Snapshot) bool { return len(s.Packs) == 1 && s.Packs[0].CellStats.Reporting == 12 })
	if snap.Mode != "replay" {
		t.Errorf("replay mode = %q", snap.Mode)
	}
	// the page's timeline lists the recording's events with their offsets
	resp0, err := http.Get(url + "api/replay/events")
	if err != nil {
		t.Fatal(err)
	}
	var tl struct {
		StartT float64 `json:"start_t"`
		Events []struct {
			OffsetS float64 `json:"offset_s"`
			Kind    string  `json:"kind"`
			Text    string  `json:"text"`
		} `json:"events"`
	}
	json.NewDecoder(resp0.Body).Decode(&tl)
	resp0.Body.Close()
	connects := 0
	for _, e := range tl.Events {
		if e.Kind == "connect" && e.OffsetS >= 0 {
			connects++
		}
	}
	if tl.StartT == 0 || connects != 2 {
		t.Errorf("replay events: start %v, %d connect events (want the demo's 2 sources): %+v", tl.StartT, connects, tl.Events)
	}
	// at 10× the replay moves on; a seek back to 0.2 s from the start (as the
	// page's seek does) resets the engine and fast-forwards there
	ahead := waitState(t, url, func(s *pack.Snapshot) bool { return float64(s.DataT) > float64(snap.DataT)+1 })
	req, _ := http.NewRequest("POST", url+"api/replay/seek?offset_s=0.2", nil)
	req.Header.Set("Origin", strings.TrimSuffix(url, "/"))
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode/100 != 2 {
		t.Fatalf("seek: %s", resp.Status)
	}
	waitState(t, url, func(s *pack.Snapshot) bool {
		return float64(s.DataT) < float64(ahead.DataT)-0.5 && len(s.Packs) == 1 && s.Packs[0].CellStats.Reporting > 0
	})
	cancel2()
	if c := <-code; c != 0 {
		t.Fatalf("replay exit %d: %s", c, errb.String())
	}
}

// TestTwoPacksOverlappingIDs: two packs on separate buses whose BMSs use the
// same IDs are kept apart: each pack decodes only its own source's frames.
func TestTwoPacksOverlappingIDs(t *testing.T) {
	dir := t.TempDir()
	ex, _ := os.ReadFile("../../config/examples/buoy-winch.toml")
	a := filepath.Join(dir, "pod-a.toml")
	b := filepath.Join(dir, "pod-b.toml")
	os.WriteFile(a, ex, 0o644)
	os.WriteFile(b, bytes.Replace(bytes.Replace(ex, []byte(`device = "can0"`), []byte(`device = "can1"`), 1), []byte(`"/dev/ttyUSB0"`), []byte(`"/dev/ttyUSB1"`), 1), 0o644)
	pa, ma := mustLoad(t, a)
	pb, mb := mustLoad(t, b)
	s, err := newSession([]*config.Profile{pa, pb}, []*decode.Map{ma, mb}, "simulated", nil, quiet)
	if err != nil {
		t.Fatal(err)
	}
	if len(s.devices) != 4 {
		t.Fatalf("devices = %d, want 4", len(s.devices))
	}
	can1 := -1
	for i, d := range s.devices {
		if d.spec.Device == "can1" {
			can1 = i
		}
	}
	frame := func(src int, mv uint16) bus.Message {
		f := can.Frame{ID: 0x4C0, Length: 7, Data: can.Data{0, byte(mv), byte(mv >> 8), byte(mv), byte(mv >> 8), byte(mv), byte(mv >> 8)}}
		return bus.Message{T: 1e18, Src: uint16(src), Kind: bus.KindCAN, Frame: f}
	}
	s.Deliver([]bus.Message{frame(0, 3700), frame(can1, 3900)})
	snap := s.eng.Snapshot(time.Unix(0, 1e18))
	got := map[string]float64{}
	for _, p := range snap.Packs {
		if v := p.Cells[0].V; v != nil {
			got[p.ID] = float64(*v)
		}
	}
	if got["pod-a"] != 3.7 || got["pod-b"] != 3.9 {
		t.Errorf("cell 1 per pack = %v, want pod-a 3.7, pod-b 3.9", got)
	}
}
