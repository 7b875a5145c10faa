package server

import (
	"encoding/base64"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/http/httptest"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"packwatch/pack"
)

// addrListener is a loopback listener that reports another address, so a
// test can stand for a server bound to a LAN address without any traffic
// leaving this machine (192.0.2.0/24 is TEST-NET-1, RFC 5737).
type addrListener struct {
	net.Listener
	addr net.Addr
}

func (l addrListener) Addr() net.Addr { return l.addr }

func lanListener(t testing.TB) net.Listener {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	return addrListener{ln, &net.TCPAddr{IP: net.IPv4(192, 0, 2, 10), Port: 8080}}
}

func loopListener(t testing.TB) net.Listener {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	return ln
}

// newTestServer builds a server without running it; its hub has ticked once.
func newTestServer(t *testing.T, o Options) *Server {
	t.Helper()
	if o.Listener == nil {
		o.Listener = loopListener(t)
	}
	if o.Engine == nil {
		o.Engine = newFakeEngine(8, 2)
	}
	s, err := New(o)
	if err != nil {
		t.Fatalf("New: %v", err)
	}
	t.Cleanup(func() { s.Close() })
	s.hub.tick(time.Now())
	return s
}

func do(s *Server, method, target string, hdr map[string]string) *httptest.ResponseRecorder {
	r := httptest.NewRequest(method, target, nil)
	r.Host = "127.0.0.1:8080"
	for k, v := range hdr {
		if k == "Host" {
			r.Host = v
			continue
		}
		r.Header.Set(k, v)
	}
	w := httptest.NewRecorder()
	s.Handler().ServeHTTP(w, r)
	return w
}

func TestHostHeader(t *testing.T) {
	s := newTestServer(t, Options{AllowedHosts: []string{"bench-3.lan"}})
	for _, tc := range []struct {
		host string
		want int
	}{
		{"127.0.0.1:8080", 200},
		{"localhost:8080", 200},
		{"LOCALHOST:8080", 200},
		{"[::1]:8080", 200},
		{"192.168.1.20:8080", 200}, // an IP literal cannot come from DNS rebinding
		{"packwatch.localhost:8080", 200},
		{"bench-3.lan:8080", 200},
		{"bench-3.lan.:8080", 200},
		{"evil.example:8080", http.StatusMisdirectedRequest},
		{"127.0.0.1.evil.example", http.StatusMisdirectedRequest},
		{"localhost.evil.example:8080", http.StatusMisdirectedRequest},
		{"", http.StatusMisdirectedRequest},
	} {
		t.Run(tc.host, func(t *testing.T) {
			w := do(s, "GET", "/api/state", map[string]string{"Host": tc.host})
			if w.Code != tc.want {
				t.Errorf("Host %q: status %d, want %d (%s)", tc.host, w.Code, tc.want, w.Body.String())
			}
		})
	}
}

func TestOriginOnPost(t *testing.T) {
	eng := newFakeEngine(8, 2)
	eng.setOver(2)
	s := newTestServer(t, Options{Engine: eng})
	s.hub.tick(time.Now()) // raises alarm 1
	for _, tc := range []struct {
		name, origin, path string
		want               int
	}{
		{"no origin", "", "/api/packs/a/alarms/1/ack", http.StatusForbidden},
		{"foreign origin", "http://evil.example", "/api/packs/a/alarms/1/ack", http.StatusForbidden},
		{"null origin", "null", "/api/packs/a/alarms/1/ack", http.StatusForbidden},
		{"other port", "http://127.0.0.1:9999", "/api/packs/a/alarms/1/ack", http.StatusForbidden},
		{"userinfo", "http://x@127.0.0.1:8080", "/api/packs/a/alarms/1/ack", http.StatusForbidden},
		{"path", "http://127.0.0.1:8080/evil", "/api/packs/a/alarms/1/ack", http.StatusForbidden},
		{"same origin, unknown alarm", "http://127.0.0.1:8080", "/api/packs/a/alarms/99/ack", http.StatusNotFound},
		{"same origin, bad id", "http://127.0.0.1:8080", "/api/packs/a/alarms/x/ack", http.StatusBadRequest},
		{"same origin", "http://127.0.0.1:8080", "/api/packs/a/alarms/1/ack", http.StatusOK},
	} {
		t.Run(tc.name, func(t *testing.T) {
			h := map[string]string{}
			if tc.origin != "" {
				h["Origin"] = tc.origin
			}
			w := do(s, "POST", tc.path, h)
			if w.Code != tc.want {
				t.Errorf("status %d, want %d (%s)", w.Code, tc.want, w.Body.String())
			}
		})
	}
	eng.mu.Lock()
	defer eng.mu.Unlock()
	if !eng.acked[1] {
		t.Error("the same-origin POST did not reach the engine")
	}
}

func TestTokenOffLoopback(t *testing.T) {
	s := newTestServer(t, Options{Listener: lanListener(t)})
	tok := s.Token()
	raw, err := base64.RawURLEncoding.DecodeString(tok)
	if err != nil || len(raw) != 16 {
		t.Fatalf("generated token %q: want 128 bits base64url (%v)", tok, err)
	}
	if !strings.Contains(s.URL(), "?token="+tok) {
		t.Errorf("URL %q lacks the token", s.URL())
	}
	for _, tc := range []struct {
		name string
		path string
		hdr  map[string]string
		want int
	}{
		{"no token", "/", nil, http.StatusUnauthorized},
		{"no token api", "/api/state", nil, http.StatusUnauthorized},
		{"no token healthz", "/healthz", nil, http.StatusUnauthorized},
		{"no token static", "/static/app.js", nil, http.StatusUnauthorized},
		{"wrong token", "/?token=AAAAAAAAAAAAAAAAAAAAAA", nil, http.StatusUnauthorized},
		{"query token", "/?token=" + tok, nil, http.StatusOK},
		{"cookie", "/api/state", map[string]string{"Cookie": cookieName + "=" + tok}, http.StatusOK},
		{"wrong cookie", "/api/state", map[string]string{"Cookie": cookieName + "=" + tok + "x"}, http.StatusUnauthorized},
		{"bearer", "/api/state", map[string]string{"Authorization": "Bearer " + tok}, http.StatusOK},
	} {
		t.Run(tc.name, func(t *testing.T) {
			w := do(s, "GET", tc.path, tc.hdr)
			if w.Code != tc.want {
				t.Errorf("status %d, want %d", w.Code, tc.want)
			}
		})
	}
	// The first visit with ?token= leaves a SameSite, HttpOnly cookie.
	w := do(s, "GET", "/?token="+tok, nil)
	c := w.Result().Cookies()
	if len(c) != 1 || c[0].Name != cookieName || c[0].Value != tok || !c[0].HttpOnly || c[0].SameSite != http.SameSiteLaxMode {
		t.Errorf("cookie after first visit = %+v", c)
	}
}

func TestTokenLoopbackOptional(t *testing.T) {
	s := newTestServer(t, Options{})
	if s.Token() != "" {
		t.Errorf("loopback server made token %q; none is needed", s.Token())
	}
	if w := do(s, "GET", "/api/state", nil); w.Code != 200 {
		t.Errorf("status %d", w.Code)
	}
	// A given token is enforced on loopback too.
	s2 := newTestServer(t, Options{Token: "correct-horse-battery"})
	if w := do(s2, "GET", "/api/state", nil); w.Code != http.StatusUnauthorized {
		t.Errorf("status without token %d, want 401", w.Code)
	}
	if _, err := New(Options{Engine: newFakeEngine(1, 1), Listener: loopListener(t), Token: "short"}); err == nil {
		t.Error("New accepted a 5-character token")
	}
}

func TestNewTokenRandom(t *testing.T) {
	seen := map[string]bool{}
	for range 100 {
		tok, err := NewToken()
		if err != nil {
			t.Fatal(err)
		}
		if seen[tok] {
			t.Fatalf("token %q repeated", tok)
		}
		seen[tok] = true
	}
}

func TestSecurityHeaders(t *testing.T) {
	s := newTestServer(t, Options{})
	for _, path := range []string{"/", "/api/state", "/static/app.js", "/nope"} {
		w := do(s, "GET", path, nil)
		h := w.Header()
		csp := h.Get("Content-Security-Policy")
		if !strings.Contains(csp, "script-src 'self'") || strings.Contains(csp, "unsafe-inline") || strings.Contains(csp, "unsafe-eval") {
			t.Errorf("%s: CSP %q", path, csp)
		}
		if h.Get("X-Content-Type-Options") != "nosniff" {
			t.Errorf("%s: X-Content-Type-Options %q", path, h.Get("X-Content-Type-Options"))
		}
		if h.Get("Referrer-Policy") != "no-referrer" {
			t.Errorf("%s: Referrer-Policy %q", path, h.Get("Referrer-Policy"))
		}
	}
}

// The page has no inline script or style (the CSP would block them), loads
// only local assets, and carries data-seq for tests.
func TestPageNoInlineScript(t *testing.T) {
	s := newTestServer(t, Options{Mode: "replay", Replay: &fakeReplay{}})
	w := do(s, "GET", "/", nil)
	if w.Code != 200 || !strings.HasPrefix(w.Header().Get("Content-Type"), "text/html") {
		t.Fatalf("GET /: %d %s", w.Code, w.Header().Get("Content-Type"))
	}
	body := w.Body.String()
	for _, m := range regexp.MustCompile(`<script[^>]*>`).FindAllString(body, -1) {
		if !strings.Contains(m, `src="/static/`) {
			t.Errorf("inline or remote script: %s", m)
		}
	}
	if regexp.MustCompile(`<style|\sstyle=|\son[a-z]+=`).MatchString(body) {
		t.Error("page has inline style or event handler attributes")
	}
	if regexp.MustCompile(`(src|href)="(https?:)?//`).MatchString(body) {
		t.Error("page loads something from another host")
	}
	for _, want := range []string{`data-seq="0"`, `data-mode="replay"`, `data-replay="yes"`, `href="#safety"`, "never the protection"} {
		if !strings.Contains(body, want) {
			t.Errorf("page lacks %s", want)
		}
	}
}

func TestStaticFiles(t *testing.T) {
	s := newTestServer(t, Options{})
	for _, tc := range []struct {
		path string
		want int
		ct   string
	}{
		{"/static/app.js", 200, "javascript"},
		{"/static/style.css", 200, "text/css"},
		{"/static/vendor/uplot/uPlot.iife.min.js", 200, "javascript"},
		{"/static/vendor/uplot/LICENSE", 200, ""},
		{"/static/", 404, ""},
		{"/static/vendor/", 404, ""},
		{"/static/../web.go", 404, ""},
		{"/static/%2e%2e/web.go", 404, ""},
		{"/static/missing.js", 404, ""},
	} {
		w := do(s, "GET", tc.path, nil)
		if w.Code != tc.want {
			t.Errorf("%s: status %d, want %d", tc.path, w.Code, tc.want)
		}
		if tc.ct != "" && !strings.Contains(w.Header().Get("Content-Type"), tc.ct) {
			t.Errorf("%s: Content-Type %q", tc.path, w.Header().Get("Content-Type"))
		}
	}
}

func TestAPIState(t *testing.T) {
	eng := newFakeEngine(4, 2)
	s, err := New(Options{Engine: eng, Listener: loopListener(t)})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if w := do(s, "GET", "/api/state", nil); w.Code != http.StatusServiceUnavailable {
		t.Errorf("before the first tick: %d, want 503", w.Code)
	}
	if w := do(s, "GET", "/healthz", nil); w.Code != http.StatusServiceUnavailable {
		t.Errorf("healthz before the first tick: %d, want 503", w.Code)
	}
	s.hub.tick(time.Now())
	s.hub.tick(time.Now())
	w := do(s, "GET", "/api/state", nil)
	var got struct {
		Seq   uint64 `json:"seq"`
		Mode  string `json:"mode"`
		Packs []struct {
			Cells []struct {
				V *float64 `json:"v"`
			} `json:"cells"`
		} `json:"packs"`
	}
	if err := json.Unmarshal(w.Body.Bytes(), &got); err != nil {
		t.Fatalf("decode: %v", err)
	}
	if got.Seq != 2 || got.Mode != "live" || len(got.Packs) != 1 || len(got.Packs[0].Cells) != 4 {
		t.Errorf("state = %+v", got)
	}
	var h health
	w = do(s, "GET", "/healthz", nil)
	if err := json.Unmarshal(w.Body.Bytes(), &h); err != nil || w.Code != 200 || h.Status != "ok" || h.Seq != 2 {
		t.Errorf("healthz %d %+v %v", w.Code, h, err)
	}
}

func TestAPIProfileAndBus(t *testing.T) {
	s := newTestServer(t, Options{})
	if w := do(s, "GET", "/api/profile", nil); w.Code != 404 {
		t.Errorf("profile without ProfileJSON: %d", w.Code)
	}
	if w := do(s, "GET", "/api/bus", nil); w.Code != 404 {
		t.Errorf("bus without a bus view: %d", w.Code)
	}
	s2 := newTestServer(t, Options{
		ProfileJSON: func() any { return map[string]any{"pack": map[string]any{"name": "Test pack A", "cells": 8}} },
		BusView:     fakeBus,
	})
	w := do(s2, "GET", "/api/profile", nil)
	if w.Code != 200 || !strings.Contains(w.Body.String(), `"cells":8`) {
		t.Errorf("profile: %d %s", w.Code, w.Body.String())
	}
	w = do(s2, "GET", "/api/bus", nil)
	if w.Code != 200 || !strings.Contains(w.Body.String(), `"id_hex":"0x7FF"`) || !strings.Contains(w.Body.String(), `"load_pct":23.5`) {
		t.Errorf("bus: %d %s", w.Code, w.Body.String())
	}
}

// No route writes anything on GET, and unknown methods are refused.
func TestMethods(t *testing.T) {
	s := newTestServer(t, Options{})
	origin := map[string]string{"Origin": "http://127.0.0.1:8080"}
	for _, tc := range []struct {
		method, path string
		want         int
	}{
		{"GET", "/api/packs/a/alarms/1/ack", http.StatusMethodNotAllowed},
		{"POST", "/api/state", http.StatusMethodNotAllowed},
		{"PUT", "/api/state", http.StatusMethodNotAllowed},
		{"DELETE", "/", http.StatusMethodNotAllowed},
		{"POST", "/api/replay/pause", http.StatusNotFound}, // no replay: no route
	} {
		if w := do(s, tc.method, tc.path, origin); w.Code != tc.want {
			t.Errorf("%s %s: %d, want %d", tc.method, tc.path, w.Code, tc.want)
		}
	}
}

type fakeReplay struct {
	mu    sync.Mutex
	calls []string
	fail  bool
}

func (f *fakeReplay) called() string {
	f.mu.Lock()
	defer f.mu.Unlock()
	return strings.Join(f.calls, ",")
}

func (f *fakeReplay) rec(s string) error {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.calls = append(f.calls, s)
	if f.fail {
		return errors.New("replay: not seekable")
	}
	return nil
}
func (f *fakeReplay) Pause() error               { return f.rec("pause") }
func (f *fakeReplay) Play() error                { return f.rec("play") }
func (f *fakeReplay) Seek(d time.Duration) error { return f.rec("seek " + d.String()) }
func (f *fakeReplay) SetSpeed(x float64) error {
	return f.rec("speed " + strconv.FormatFloat(x, 'g', -1, 64))
}

func TestReplayRoutes(t *testing.T) {
	rp := &fakeReplay{}
	s := newTestServer(t, Options{Mode: "replay", Replay: rp})
	origin := map[string]string{"Origin": "http://127.0.0.1:8080"}
	for _, tc := range []struct {
		path string
		want int
	}{
		{"/api/replay/pause", 200},
		{"/api/replay/play", 200},
		{"/api/replay/seek?offset_s=90.5", 200},
		{"/api/replay/speed?x=30", 200},
		{"/api/replay/speed?x=0", 400},
		{"/api/replay/speed?x=NaN", 400},
		{"/api/replay/seek?offset_s=-1", 400},
		{"/api/replay/seek?offset_s=/etc/passwd", 400},
		{"/api/replay/rewind", 404},
	} {
		if w := do(s, "POST", tc.path, origin); w.Code != tc.want {
			t.Errorf("%s: %d, want %d (%s)", tc.path, w.Code, tc.want, w.Body.String())
		}
	}
	want := []string{"pause", "play", "seek 1m30.5s", "speed 30"}
	if rp.called() != strings.Join(want, ",") {
		t.Errorf("replay calls %q, want %q", rp.calls, want)
	}
	if w := do(s, "POST", "/api/replay/pause", nil); w.Code != http.StatusForbidden {
		t.Errorf("replay POST without Origin: %d, want 403", w.Code)
	}
	rp.mu.Lock()
	rp.fail = true
	rp.mu.Unlock()
	if w := do(s, "POST", "/api/replay/play", origin); w.Code != http.StatusConflict || !strings.Contains(w.Body.String(), "not seekable") {
		t.Errorf("failing replay: %d %s", w.Code, w.Body.String())
	}
}

func TestNewOptions(t *testing.T) {
	for _, tc := range []struct {
		name string
		o    Options
	}{
		{"no engine", Options{}},
		{"bad mode", Options{Engine: newFakeEngine(1, 1), Mode: "test"}},
		{"half TLS", Options{Engine: newFakeEngine(1, 1), TLSCert: "x.pem"}},
		{"missing TLS files", Options{Engine: newFakeEngine(1, 1), TLSCert: "testdata/none.pem", TLSKey: "testdata/none.key"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			tc.o.Listener = loopListener(t)
			defer tc.o.Listener.Close()
			if s, err := New(tc.o); err == nil {
				s.Close()
				t.Error("New accepted bad options")
			}
		})
	}
}

// Extra handlers sit behind the same checks as the built-in routes.
func TestExtraHandlers(t *testing.T) {
	var paths []string
	h := http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		paths = append(paths, r.Method+" "+r.URL.Path)
		_, _ = io.WriteString(w, "ok")
	})
	s := newTestServer(t, Options{Listener: lanListener(t), Handlers: map[string]http.Handler{"/metrics": h, "/api/check/*": h}, CheckPanel: true})
	tok := map[string]string{"Authorization": "Bearer " + s.Token()}
	tokOrigin := map[string]string{"Authorization": "Bearer " + s.Token(), "Origin": "http://127.0.0.1:8080"}
	for _, tc := range []struct {
		method, path string
		hdr          map[string]string
		want         int
	}{
		{"GET", "/metrics", nil, http.StatusUnauthorized},
		{"GET", "/metrics", tok, 200},
		{"GET", "/metrics", map[string]string{"Authorization": "Bearer " + s.Token(), "Host": "evil.example"}, http.StatusMisdirectedRequest},
		{"POST", "/api/check/run", tok, http.StatusForbidden},
		{"POST", "/api/check/run", tokOrigin, 200},
		{"GET", "/api/check/history", tok, 200},
	} {
		if w := do(s, tc.method, tc.path, tc.hdr); w.Code != tc.want {
			t.Errorf("%s %s: %d, want %d", tc.method, tc.path, w.Code, tc.want)
		}
	}
	if got := strings.Join(paths, ","); got != "GET /metrics,POST /api/check/run,GET /api/check/history" {
		t.Errorf("handler saw %s", got)
	}
	page := do(s, "GET", "/", tok).Body.String()
	for _, want := range []string{`id="check-panel"`, `src="/static/check.js"`, `href="/static/check.css"`} {
		if !strings.Contains(page, want) {
			t.Errorf("page with CheckPanel lacks %s", want)
		}
	}
	if page := do(newTestServer(t, Options{}), "GET", "/", nil).Body.String(); strings.Contains(page, "check-panel") {
		t.Error("page without CheckPanel has the check panel")
	}
}

// OnSnapshot sees every snapshot the hub takes, in order, the same one
// /api/state serves.
func TestOnSnapshot(t *testing.T) {
	var seqs []uint64
	s := newTestServer(t, Options{OnSnapshot: func(p *pack.Snapshot) { seqs = append(seqs, p.Seq) }})
	s.hub.tick(time.Now())
	s.hub.tick(time.Now())
	if fmt.Sprint(seqs) != "[1 2 3]" {
		t.Errorf("OnSnapshot saw %v, want [1 2 3]", seqs)
	}
	if s.Latest() == nil || s.Latest().Seq != 3 {
		t.Errorf("Latest = %+v", s.Latest())
	}
}
