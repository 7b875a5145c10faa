package server

import (
	"bytes"
	"context"
	"encoding/json"
	"net"
	"net/http"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"github.com/gorilla/websocket"
)

// wsMsg is a websocket message as the page reads it.
type wsMsg struct {
	Type string          `json:"type"`
	Data json.RawMessage `json:"data"`
}

func wsURL(base string) string { return "ws" + strings.TrimPrefix(base, "http") + "/ws" }

func dialWS(t testing.TB, base string, hdr http.Header, d *websocket.Dialer) (*websocket.Conn, *http.Response, error) {
	t.Helper()
	if hdr == nil {
		hdr = http.Header{"Origin": {base}}
	}
	if d == nil {
		d = websocket.DefaultDialer
	}
	return d.Dial(wsURL(base), hdr)
}

// reader reads a client's messages in the background and keeps the latest
// snapshot seq; it records any seq that went backwards.
type reader struct {
	conn     *websocket.Conn
	types    []string // first message types, in order
	seq      atomic.Uint64
	n        atomic.Int64
	backward atomic.Bool
	mu       sync.Mutex
	done     chan struct{}
}

func startReader(c *websocket.Conn) *reader { return startReaderHook(c, nil) }

// startReaderHook also calls onSnap with each snapshot's seq.
func startReaderHook(c *websocket.Conn, onSnap func(uint64)) *reader {
	r := &reader{conn: c, done: make(chan struct{})}
	go func() {
		defer close(r.done)
		for {
			_, b, err := c.ReadMessage()
			if err != nil {
				return
			}
			typ, seq, ok := peek(b)
			if !ok {
				continue
			}
			r.mu.Lock()
			if len(r.types) < 4 {
				r.types = append(r.types, typ)
			}
			r.mu.Unlock()
			if typ == "snapshot" {
				s := struct{ Seq uint64 }{seq}
				if s.Seq < r.seq.Load() {
					r.backward.Store(true)
				}
				r.seq.Store(s.Seq)
				r.n.Add(1)
				if onSnap != nil {
					onSnap(s.Seq)
				}
			}
		}
	}()
	return r
}

func (r *reader) close() { r.conn.Close(); <-r.done }

// peek reads a message's type and, for a snapshot, its seq without decoding
// the whole message (the server writes {"type":T,"data":{"seq":N,...}}), so
// test clients cost little CPU beside the server under test.
func peek(b []byte) (typ string, seq uint64, ok bool) {
	const pre = `{"type":"`
	if !bytes.HasPrefix(b, []byte(pre)) {
		return "", 0, false
	}
	rest := b[len(pre):]
	i := bytes.IndexByte(rest, '"')
	if i < 0 {
		return "", 0, false
	}
	typ = string(rest[:i])
	if typ != "snapshot" {
		return typ, 0, true
	}
	const key = `"data":{"seq":`
	j := bytes.Index(rest, []byte(key))
	if j < 0 {
		return "", 0, false
	}
	for _, c := range rest[j+len(key):] {
		if c < '0' || c > '9' {
			break
		}
		seq = seq*10 + uint64(c-'0')
	}
	return typ, seq, true
}

func TestWSFanout(t *testing.T) {
	eng := newFakeEngine(100, 8)
	rs := startServer(t, Options{Engine: eng, Tick: 10 * time.Millisecond})
	const clients = 25
	var rd []*reader
	for range clients {
		c, _, err := dialWS(t, rs.base, nil, nil)
		if err != nil {
			t.Fatalf("dial: %v", err)
		}
		rd = append(rd, startReader(c))
	}
	defer func() {
		for _, r := range rd {
			r.close()
		}
	}()
	waitFor(t, "all clients registered", 10*time.Second, func() bool { return rs.s.hub.count() == clients })
	start := rs.s.hub.latest.Load().snap.Seq
	waitFor(t, "every client 20 snapshots further", 30*time.Second, func() bool {
		for _, r := range rd {
			if r.seq.Load() < start+20 {
				return false
			}
		}
		return true
	})
	for i, r := range rd {
		r.mu.Lock()
		types := strings.Join(r.types, ",")
		r.mu.Unlock()
		if !strings.HasPrefix(types, "hello,history,snapshot") {
			t.Errorf("client %d: first messages %s, want hello, history, snapshot", i, types)
		}
		if r.backward.Load() {
			t.Errorf("client %d: seq went backwards", i)
		}
	}
}

func TestWSRefused(t *testing.T) {
	rs := startServer(t, Options{Engine: newFakeEngine(4, 1)})
	port := rs.base[strings.LastIndex(rs.base, ":"):]
	for _, tc := range []struct {
		name string
		hdr  http.Header
		want int
	}{
		{"wrong origin", http.Header{"Origin": {"http://evil.example"}}, http.StatusForbidden},
		{"no origin", http.Header{}, http.StatusForbidden},
		{"origin other port", http.Header{"Origin": {"http://127.0.0.1:1"}}, http.StatusForbidden},
		{"wrong host", http.Header{"Origin": {"http://evil.example" + port}, "Host": {"evil.example" + port}}, http.StatusMisdirectedRequest},
	} {
		t.Run(tc.name, func(t *testing.T) {
			c, resp, err := dialWS(t, rs.base, tc.hdr, nil)
			if err == nil {
				c.Close()
				t.Fatal("websocket accepted")
			}
			if resp == nil || resp.StatusCode != tc.want {
				code := 0
				if resp != nil {
					code = resp.StatusCode
				}
				t.Errorf("status %d, want %d (%v)", code, tc.want, err)
			}
		})
	}
}

func TestWSTokenOffLoopback(t *testing.T) {
	rs := startServer(t, Options{Engine: newFakeEngine(4, 1), Listener: lanListener(t)})
	// The listener reports a LAN address; dial its real loopback address.
	real := rs.s.ln.(addrListener).Listener.Addr().String()
	base := "http://" + real
	if _, resp, err := dialWS(t, base, http.Header{"Origin": {base}}, nil); err == nil || resp == nil || resp.StatusCode != http.StatusUnauthorized {
		t.Errorf("websocket without token: %v %v, want 401", err, resp)
	}
	c, _, err := dialWS(t, base, http.Header{"Origin": {base}, "Cookie": {cookieName + "=" + rs.s.Token()}}, nil)
	if err != nil {
		t.Fatalf("websocket with token cookie: %v", err)
	}
	r := startReader(c)
	defer r.close()
	waitFor(t, "a snapshot with the token", 10*time.Second, func() bool { return r.n.Load() > 0 })
}

// blockingListener gives accepted connections a small send buffer and
// lets the test see whether a Write is blocked, per remote address.
type blockingListener struct {
	net.Listener
	mu    sync.Mutex
	conns map[string]*watchConn
}

type watchConn struct {
	net.Conn
	inWrite atomic.Bool
	written atomic.Int64
}

func (c *watchConn) Write(b []byte) (int, error) {
	c.inWrite.Store(true)
	n, err := c.Conn.Write(b)
	c.written.Add(int64(n))
	c.inWrite.Store(false)
	return n, err
}

func (l *blockingListener) Accept() (net.Conn, error) {
	c, err := l.Listener.Accept()
	if err != nil {
		return nil, err
	}
	if tc, ok := c.(*net.TCPConn); ok {
		_ = tc.SetWriteBuffer(4096)
	}
	w := &watchConn{Conn: c}
	l.mu.Lock()
	l.conns[c.RemoteAddr().String()] = w
	l.mu.Unlock()
	return w, nil
}

func (l *blockingListener) conn(remote string) *watchConn {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.conns[remote]
}

// stallDialer connects with a tiny receive buffer (SO_RCVBUF), so a client
// that never reads fills the path within a few kilobytes; loopback's usual
// megabytes would hide it for minutes.
var stallDialer = &websocket.Dialer{
	HandshakeTimeout: 10 * time.Second,
	NetDialContext: (&net.Dialer{Control: func(network, address string, c syscall.RawConn) error {
		var serr error
		err := c.Control(func(fd uintptr) {
			serr = syscall.SetsockoptInt(int(fd), syscall.SOL_SOCKET, syscall.SO_RCVBUF, 2048)
		})
		if err != nil {
			return err
		}
		return serr
	}}).DialContext,
}

// TestWSStalledClient: a client that stops reading blocks only its own
// writer. While its write is stuck, the other clients' sequence numbers keep
// advancing; shutdown still completes.
func TestWSStalledClient(t *testing.T) {
	bl := &blockingListener{Listener: loopListener(t), conns: map[string]*watchConn{}}
	eng := newFakeEngine(100, 8) // ~10 KB a snapshot: more than both buffers
	rs := startServer(t, Options{Engine: eng, Listener: bl, Tick: 10 * time.Millisecond, WriteTimeout: time.Minute})

	var healthy []*reader
	for range 3 {
		c, _, err := dialWS(t, rs.base, nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		healthy = append(healthy, startReader(c))
	}
	defer func() {
		for _, r := range healthy {
			r.close()
		}
	}()
	stalled, _, err := dialWS(t, rs.base, nil, stallDialer)
	if err != nil {
		t.Fatalf("dial stalled client: %v", err)
	}
	defer stalled.Close()
	// Never read from it. Find its server side and wait until a write blocks.
	var sc *watchConn
	waitFor(t, "server side of the stalled client", 10*time.Second, func() bool {
		sc = bl.conn(stalled.LocalAddr().String())
		return sc != nil
	})
	// The client never reads, so after a finite number of bytes a write
	// blocks for good. A write seen in progress may still complete (the
	// buffers were not full yet): then look again. The stall is proven when
	// a write stays in progress with no byte moving while the healthy
	// clients receive 50 more snapshots.
	proven := false
	for try := 0; try < 100 && !proven; try++ {
		waitFor(t, "a write to the stalled client in progress", 30*time.Second, func() bool {
			return sc.inWrite.Load() && sc.written.Load() > 0
		})
		stuckAt := sc.written.Load()
		from := make([]uint64, len(healthy))
		for i, r := range healthy {
			from[i] = r.seq.Load()
		}
		waitFor(t, "healthy clients 50 snapshots further", 30*time.Second, func() bool {
			for i, r := range healthy {
				if r.seq.Load() < from[i]+50 {
					return false
				}
			}
			return true
		})
		proven = sc.inWrite.Load() && sc.written.Load() == stuckAt
	}
	if !proven {
		t.Fatal("the client that never reads never blocked a write: the stall was not real")
	}
	if got := rs.s.hub.count(); got != 4 {
		t.Errorf("clients = %d, want 4 (the stuck one is kept until its write deadline)", got)
	}
	rs.stop(t) // shutdown must not hang on the stuck write
}

// TestWSStuckClientDropped: past the write deadline a stuck client is dropped.
func TestWSStuckClientDropped(t *testing.T) {
	bl := &blockingListener{Listener: loopListener(t), conns: map[string]*watchConn{}}
	rs := startServer(t, Options{Engine: newFakeEngine(100, 8), Listener: bl, Tick: 10 * time.Millisecond, WriteTimeout: 200 * time.Millisecond})
	good, _, err := dialWS(t, rs.base, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	gr := startReader(good)
	defer gr.close()
	stalled, _, err := dialWS(t, rs.base, nil, stallDialer)
	if err != nil {
		t.Fatal(err)
	}
	defer stalled.Close()
	waitFor(t, "the stuck client dropped", 30*time.Second, func() bool { return rs.s.hub.dropped.Load() >= 1 && rs.s.hub.count() == 1 })
	from := gr.seq.Load()
	waitFor(t, "the good client still served", 30*time.Second, func() bool { return gr.seq.Load() >= from+10 })
}

// TestWSBusSubscription: the bus view goes only to clients that ask for it.
func TestWSBusSubscription(t *testing.T) {
	rs := startServer(t, Options{Engine: newFakeEngine(4, 1), BusView: fakeBus, Tick: 10 * time.Millisecond, BusEvery: 20 * time.Millisecond})
	sub, _, err := dialWS(t, rs.base, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer sub.Close()
	other, _, err := dialWS(t, rs.base, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer other.Close()
	if err := sub.WriteMessage(websocket.TextMessage, []byte(`{"type":"subscribe","bus":true}`)); err != nil {
		t.Fatal(err)
	}
	count := func(c *websocket.Conn, n int) (bus, snaps int) {
		for snaps+bus < n {
			_ = c.SetReadDeadline(time.Now().Add(20 * time.Second))
			_, b, err := c.ReadMessage()
			if err != nil {
				t.Fatalf("read: %v", err)
			}
			var m wsMsg
			_ = json.Unmarshal(b, &m)
			switch m.Type {
			case "bus":
				bus++
				if !strings.Contains(string(m.Data), `"id_hex":"0x301"`) {
					t.Errorf("bus message %s", m.Data)
				}
			case "snapshot":
				snaps++
			}
		}
		return
	}
	var bus int
	for bus == 0 {
		b, _ := count(sub, 10)
		bus += b
	}
	if b, _ := count(other, 30); b != 0 {
		t.Errorf("unsubscribed client got %d bus messages", b)
	}
	// Oversized control messages close the connection (read limit).
	if err := other.WriteMessage(websocket.TextMessage, []byte(strings.Repeat("x", 4096))); err != nil {
		t.Fatal(err)
	}
	_ = other.SetReadDeadline(time.Now().Add(20 * time.Second))
	for {
		if _, _, err := other.ReadMessage(); err != nil {
			break
		}
	}
	waitFor(t, "oversized client closed", 10*time.Second, func() bool { return rs.s.hub.count() == 1 })
}

// TestRunShutdown: Run returns nil after its context ends, with clients open.
func TestRunShutdown(t *testing.T) {
	s, err := New(Options{Engine: newFakeEngine(4, 1), Listener: loopListener(t)})
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Run(ctx) }()
	base := "http://" + s.Addr().String()
	c, _, err := dialWS(t, base, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	r := startReader(c)
	waitFor(t, "a snapshot", 10*time.Second, func() bool { return r.n.Load() > 0 })
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Errorf("Run: %v", err)
		}
	case <-time.After(20 * time.Second):
		t.Fatal("Run did not return")
	}
	<-r.done // the server closed the websocket
	if _, err := http.Get(base + "/healthz"); err == nil {
		t.Error("server still answers after shutdown")
	}
	if err := s.Run(context.Background()); err == nil {
		t.Error("second Run succeeded")
	}
}

// TestWSPingPong: the server pings; a client that answers stays, one that
// reads but never answers (and sends nothing) is dropped after two intervals.
func TestWSPingPong(t *testing.T) {
	rs := startServer(t, Options{Engine: newFakeEngine(4, 1), Tick: 50 * time.Millisecond, PingEvery: 50 * time.Millisecond})
	good, _, err := dialWS(t, rs.base, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	var pings atomic.Int64
	good.SetPingHandler(func(data string) error {
		pings.Add(1)
		return good.WriteControl(websocket.PongMessage, []byte(data), time.Now().Add(time.Second))
	})
	gr := startReader(good)
	defer gr.close()
	mute, _, err := dialWS(t, rs.base, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	mute.SetPingHandler(func(string) error { return nil }) // never answers
	mr := startReader(mute)
	defer mr.close()
	waitFor(t, "both registered", 10*time.Second, func() bool { return rs.s.hub.count() == 2 })
	waitFor(t, "the silent client dropped", 30*time.Second, func() bool { return rs.s.hub.count() == 1 })
	from := pings.Load()
	waitFor(t, "the answering client pinged 5 more times", 30*time.Second, func() bool { return pings.Load() >= from+5 })
	if rs.s.hub.count() != 1 {
		t.Errorf("clients = %d, want the answering one kept", rs.s.hub.count())
	}
	select {
	case <-gr.done:
		t.Error("the answering client was dropped")
	default:
	}
}
