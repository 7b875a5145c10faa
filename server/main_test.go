package server

import (
	"context"
	"net"
	"os"
	"sync"
	"testing"
	"time"

	"go.uber.org/goleak"
)

func TestMain(m *testing.M) {
	goleak.VerifyTestMain(m,
		// chromedp's browser process reaper may outlive a test briefly.
		goleak.IgnoreTopFunction("os/exec.(*Cmd).Wait"),
	)
}

// noSkip reports that skips CI can avoid must fail instead (PACKWATCH_NO_SKIP=1).
func noSkip() bool { return os.Getenv("PACKWATCH_NO_SKIP") == "1" }

// running is a server started by startServer.
type running struct {
	s      *Server
	base   string // http://127.0.0.1:port
	cancel context.CancelFunc
	done   chan error
	once   sync.Once
}

// stop ends the server and waits for Run to return.
func (r *running) stop(t testing.TB) {
	t.Helper()
	r.once.Do(func() {
		r.cancel()
		select {
		case err := <-r.done:
			if err != nil {
				t.Errorf("Run: %v", err)
			}
		case <-time.After(10 * time.Second):
			t.Error("server did not shut down within 10 s")
		}
	})
}

// startServer runs a server on a fresh loopback port (or o.Listener) and
// stops it when the test ends.
func startServer(t testing.TB, o Options) *running {
	t.Helper()
	if o.Listener == nil {
		ln, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatalf("listen: %v", err)
		}
		o.Listener = ln
	}
	s, err := New(o)
	if err != nil {
		t.Fatalf("New: %v", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	r := &running{s: s, base: "http://" + s.Addr().String(), cancel: cancel, done: make(chan error, 1)}
	go func() { r.done <- s.Run(ctx) }()
	t.Cleanup(func() { r.stop(t) })
	return r
}

// waitFor polls cond every few milliseconds until it holds or the deadline
// passes; the condition, not the sleep, decides.
func waitFor(t testing.TB, what string, within time.Duration, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(within)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out after %v waiting for %s", within, what)
		}
		time.Sleep(5 * time.Millisecond)
	}
}
