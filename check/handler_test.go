package check

import (
	"context"
	"encoding/json"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"go.uber.org/goleak"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/pack"
	"packwatch/record"
	"packwatch/sim"
)

func TestMain(m *testing.M) {
	goleak.VerifyTestMain(m,
		// chromedp's browser process reaper may outlive the browser test briefly.
		goleak.IgnoreTopFunction("os/exec.(*Cmd).Wait"),
	)
}

type sliceSink struct{ msgs []bus.Message }

func (s *sliceSink) Deliver(b []bus.Message) { s.msgs = append(s.msgs, b...) }
func (s *sliceSink) Status(bus.Status)       {}

type eventLog struct {
	mu     sync.Mutex
	events []record.Event
}

func (e *eventLog) Event(ev record.Event) {
	e.mu.Lock()
	e.events = append(e.events, ev)
	e.mu.Unlock()
}

// feeder plays pre-simulated messages into the engine as the handler's
// injected clock advances: each After(d) delivers the next d of data.
type feeder struct {
	eng   *pack.Engine
	msgs  []bus.Message
	pos   int
	t     int64 // data time delivered up to
	wall  time.Time
	pause bool // deliver nothing (a silent bus)
}

func (f *feeder) advance(d time.Duration) {
	f.t += int64(d)
	f.wall = f.wall.Add(d)
	if f.pause {
		return
	}
	i := f.pos
	for i < len(f.msgs) && f.msgs[i].T < f.t {
		i++
	}
	if i > f.pos {
		f.eng.Deliver(f.msgs[f.pos:i])
	}
	f.pos = i
}

func (f *feeder) after(d time.Duration) <-chan time.Time {
	f.advance(d)
	c := make(chan time.Time, 1)
	c <- f.wall
	return c
}

func do(t *testing.T, h http.Handler, method, path, body string) *httptest.ResponseRecorder {
	t.Helper()
	req := httptest.NewRequest(method, path, strings.NewReader(body))
	if body != "" {
		req.Header.Set("Content-Type", "application/json")
	}
	rr := httptest.NewRecorder()
	h.ServeHTTP(rr, req)
	return rr
}

func TestHandlerRunSaveList(t *testing.T) {
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
	events := &eventLog{}
	h, err := NewHandler(HandlerOptions{Engine: eng, History: hist, Events: events, Raw: tap, Mode: ModeSimulated,
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

	rr := do(t, h, "GET", "/api/check/settings?pack=pod", "")
	if rr.Code != 200 || !strings.Contains(rr.Body.String(), "connector latched and locked") {
		t.Fatalf("settings: %d %s", rr.Code, rr.Body)
	}
	rr = do(t, h, "POST", "/api/check/run", `{"pack":"pod","seconds":10,"operator":"A. Operator"}`)
	if rr.Code != 200 {
		t.Fatalf("run: %d %s", rr.Code, rr.Body)
	}
	var run runResponse
	if err := json.Unmarshal(rr.Body.Bytes(), &run); err != nil {
		t.Fatal(err)
	}
	// Unticked checklist: no-go, with only the two manual items not passed.
	if run.Record.Verdict != VerdictNoGo || strings.Join(failing(run.Record), " ") != "manual.1 manual.2" {
		t.Fatalf("run verdict %s failing %v", run.Record.Verdict, failing(run.Record))
	}
	if run.Record.Data.Mode != ModeSimulated || !strings.Contains(run.Record.Data.Notice, "SIMULATED") {
		t.Errorf("data %+v", run.Record.Data)
	}
	// 10 s of the pod's traffic (0x310 every 50 ms, 0x320 every 100 ms,
	// console 2 lines/s: 32 messages/s): 320, give or take the edges.
	if run.Record.Raw.Messages < 310 || run.Record.Raw.Messages > 330 {
		t.Errorf("raw messages %d", run.Record.Raw.Messages)
	}

	rr = do(t, h, "POST", "/api/check/save", `{"pending":"`+run.Pending+`","confirmed":[true,true],"operator":"A. Operator","note":"pre-deployment"}`)
	if rr.Code != 200 {
		t.Fatalf("save: %d %s", rr.Code, rr.Body)
	}
	saved, err := ParseRecord(rr.Body.Bytes())
	if err != nil {
		t.Fatal(err)
	}
	if saved.Verdict != VerdictGo || saved.Hash == "" || saved.Note != "pre-deployment" || saved.VerifyHash() != nil {
		t.Fatalf("saved %s %q %v", saved.Verdict, saved.Hash, saved.VerifyHash())
	}
	if len(events.events) != 1 || events.events[0].Kind != record.EventCheck || !strings.Contains(events.events[0].Text, "pre-flight check GO") {
		t.Fatalf("events %+v", events.events)
	}
	if ev, err := ParseRecord([]byte(events.events[0].JSON)); err != nil || ev.Hash != saved.Hash || ev.VerifyHash() != nil {
		t.Errorf("event record: %v", err)
	}
	if rr := do(t, h, "POST", "/api/check/save", `{"pending":"`+run.Pending+`"}`); rr.Code != 404 {
		t.Errorf("second save: %d", rr.Code)
	}

	rr = do(t, h, "GET", "/api/check/history?key=serial:POD-0007", "")
	var list []Summary
	if err := json.Unmarshal(rr.Body.Bytes(), &list); err != nil || len(list) != 1 || list[0].Hash != saved.Hash || list[0].Verdict != VerdictGo {
		t.Fatalf("history: %v %s", err, rr.Body)
	}
	rr = do(t, h, "GET", "/api/check/results/"+saved.Hash, "")
	if back, err := ParseRecord(rr.Body.Bytes()); rr.Code != 200 || err != nil || back.VerifyHash() != nil {
		t.Errorf("result: %d %v", rr.Code, err)
	}
	rr = do(t, h, "GET", "/api/check/results/"+saved.Hash[:16]+"/print", "")
	if rr.Code != 200 || !strings.Contains(rr.Body.String(), "PRE-FLIGHT CHECK: GO") || !strings.Contains(rr.Body.String(), "SIMULATED DATA") {
		t.Errorf("print: %d", rr.Code)
	}
	rr = do(t, h, "GET", "/api/check/verify", "")
	if !strings.Contains(rr.Body.String(), `"intact":true`) {
		t.Errorf("verify: %s", rr.Body)
	}
	if rr := do(t, h, "GET", "/api/check/schema.json", ""); rr.Code != 200 || !json.Valid(rr.Body.Bytes()) {
		t.Errorf("schema: %d", rr.Code)
	}

	// A silent bus: nothing arrives during the window: could not check.
	f.pause = true
	rr = do(t, h, "POST", "/api/check/run", `{"pack":"pod","seconds":3}`)
	if err := json.Unmarshal(rr.Body.Bytes(), &run); err != nil || run.Record.Verdict != VerdictCouldNotCheck {
		t.Errorf("silent: %v %s", err, rr.Body)
	}

	// Bad requests.
	for _, c := range []struct {
		method, path, body, ctype string
		code                      int
	}{
		{"POST", "/api/check/run", `{"pack":"pod"}`, "text/plain", 415},
		{"POST", "/api/check/run", `{"pack":"nope"}`, "application/json", 404},
		{"POST", "/api/check/run", `{"pack":"pod","seconds":500}`, "application/json", 400},
		// a recorder cannot lift the write deadline: at most 20 s
		{"POST", "/api/check/run", `{"pack":"pod","seconds":25}`, "application/json", 400},
		{"POST", "/api/check/run", `{"pack":"pod","extra":1}`, "application/json", 400},
		{"GET", "/api/check/results/zz", "", "", 404},
		{"GET", "/api/check/results/0123456789abcdef", "", "", 404},
	} {
		req := httptest.NewRequest(c.method, c.path, strings.NewReader(c.body))
		if c.ctype != "" {
			req.Header.Set("Content-Type", c.ctype)
		}
		rr := httptest.NewRecorder()
		h.ServeHTTP(rr, req)
		if rr.Code != c.code {
			t.Errorf("%s %s %s: %d, want %d", c.method, c.path, c.body, rr.Code, c.code)
		}
	}
}
