package bus

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"sync"
	"time"

	"go.einride.tech/can"
	"go.einride.tech/can/pkg/socketcan"
)

// tcpCANAdapter reads 16-byte frames from a TCP connection to a remote CAN
// gateway (or a load generator in another process).
type tcpCANAdapter struct {
	spec   Spec
	dec    frame16Decoder
	lastEr uint64
}

func newTCPCANAdapter(spec Spec) *tcpCANAdapter {
	return &tcpCANAdapter{spec: spec, dec: frame16Decoder{order: binary.LittleEndian}}
}

func (a *tcpCANAdapter) connect(ctx context.Context, idle time.Duration) (link, string, error) {
	c, err := socketcan.DialContext(ctx, "tcp", a.spec.Device)
	if err != nil {
		return nil, "", fmt.Errorf("connect %s: %w", a.spec.Device, err)
	}
	return &netLink{c: c, idle: idle}, "tcp " + c.RemoteAddr().String(), nil
}

func (a *tcpCANAdapter) decode(p []byte, t int64, src uint16, out []Message) []Message {
	return a.dec.feed(p, t, src, out)
}

func (a *tcpCANAdapter) reset()        { a.dec.reset() }
func (a *tcpCANAdapter) shutdown(link) {}

func (a *tcpCANAdapter) counts(st *Stats) (good, bad uint64) {
	st.Bad, st.ErrorFrames = a.dec.bad, a.dec.errs
	return a.dec.frames + a.dec.errs, a.dec.bad
}

func (a *tcpCANAdapter) hint(w window) string {
	return frameHint(w, &a.lastEr, &a.dec)
}

// frameHint is the diagnostic shared by the 16-byte frame sources.
func frameHint(w window, lastErr *uint64, dec *frame16Decoder) string {
	newErrs := dec.errs - *lastErr
	*lastErr = dec.errs
	switch {
	case w.bad > 0:
		return fmt.Sprintf("malformed frames (%d in %v)", w.bad, w.dur.Round(time.Millisecond))
	case newErrs > 0:
		return fmt.Sprintf("CAN error frames: %s (%d in %v)", DescribeErrorFrame(dec.lastErr), newErrs, w.dur.Round(time.Millisecond))
	}
	return ""
}

// netLink is a link on a net.Conn with an idle read deadline.
type netLink struct {
	c    net.Conn
	idle time.Duration
}

func (l *netLink) Read(p []byte) (int, error) {
	if err := l.c.SetReadDeadline(time.Now().Add(l.idle)); err != nil {
		return 0, fmt.Errorf("read: %w", err)
	}
	n, err := l.c.Read(p)
	switch {
	case err == nil:
		return n, nil
	case errors.Is(err, os.ErrDeadlineExceeded):
		return n, nil
	case errors.Is(err, io.EOF):
		return n, errors.New("connection closed by the other end")
	}
	return n, fmt.Errorf("read: %w", err)
}

func (l *netLink) Close() error { return l.c.Close() }

// TCPCANWriter sends frames in the 16-byte layout over a TCP connection it
// dialled.
type TCPCANWriter struct {
	*FrameWriter
	conn net.Conn
}

// DialTCPCAN connects to addr (host:port) for writing frames.
func DialTCPCAN(ctx context.Context, addr string) (*TCPCANWriter, error) {
	c, err := socketcan.DialContext(ctx, "tcp", addr)
	if err != nil {
		return nil, fmt.Errorf("dial tcp-can %s: %w", addr, err)
	}
	return &TCPCANWriter{FrameWriter: NewFrameWriter(c), conn: c}, nil
}

// Close closes the connection.
func (w *TCPCANWriter) Close() error { return w.conn.Close() }

// TCPCANServer accepts TCP connections and writes every frame given to
// WriteFrames to all of them: the far end of a tcp-can source, for the
// simulator and load tests.
type TCPCANServer struct {
	ln    net.Listener
	wg    sync.WaitGroup
	mu    sync.Mutex
	conns map[net.Conn]*FrameWriter
	done  bool
}

// ListenTCPCAN listens on addr ("127.0.0.1:0" for any free port).
func ListenTCPCAN(addr string) (*TCPCANServer, error) {
	ln, err := net.Listen("tcp", addr)
	if err != nil {
		return nil, fmt.Errorf("listen tcp-can %s: %w", addr, err)
	}
	s := &TCPCANServer{ln: ln, conns: map[net.Conn]*FrameWriter{}}
	s.wg.Add(1)
	go s.accept()
	return s, nil
}

func (s *TCPCANServer) accept() {
	defer s.wg.Done()
	for {
		c, err := s.ln.Accept()
		if err != nil {
			return
		}
		s.mu.Lock()
		if s.done {
			s.mu.Unlock()
			c.Close()
			return
		}
		s.conns[c] = NewFrameWriter(c)
		s.mu.Unlock()
	}
}

// Addr returns the address the server listens on.
func (s *TCPCANServer) Addr() string { return s.ln.Addr().String() }

// Clients returns the number of connected clients.
func (s *TCPCANServer) Clients() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return len(s.conns)
}

// WriteFrames sends frames to every client; a client whose write fails is
// dropped. It returns the number of clients written to. It blocks while a
// client's socket buffer is full, as a gateway pacing a slow reader would.
func (s *TCPCANServer) WriteFrames(fs []can.Frame) int {
	s.mu.Lock()
	defer s.mu.Unlock()
	n := 0
	for c, w := range s.conns {
		if err := w.WriteFrames(fs); err != nil {
			c.Close()
			delete(s.conns, c)
			continue
		}
		n++
	}
	return n
}

// DropClients closes every client connection (to test reconnects).
func (s *TCPCANServer) DropClients() {
	s.mu.Lock()
	defer s.mu.Unlock()
	for c := range s.conns {
		c.Close()
		delete(s.conns, c)
	}
}

// Close stops listening and closes every client.
func (s *TCPCANServer) Close() error {
	s.mu.Lock()
	s.done = true
	s.mu.Unlock()
	err := s.ln.Close()
	s.wg.Wait()
	s.DropClients()
	return err
}
