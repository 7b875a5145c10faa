//go:build unix

package bus_test

import (
	"bytes"
	"encoding/binary"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/creack/pty"
	"go.einride.tech/can"
	"golang.org/x/sys/unix"

	"packwatch/bus"
	"packwatch/bus/bustest"
)

// testSpec returns a spec with quick retries for tests.
func testSpec(kind, device string) bus.Spec {
	return bus.Spec{Index: 3, Name: "dut", Kind: kind, Device: device,
		RetryMin: 5 * time.Millisecond, RetryMax: 20 * time.Millisecond}
}

// waitUntil polls cond (a condition wait, not a timed guess) and fails
// after bustest.WaitTimeout.
func waitUntil(t testing.TB, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(bustest.WaitTimeout)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(time.Millisecond)
	}
}

// ptyDev is a serial device made of a pseudo-terminal, found by the source
// through a symlink (the path the profile names) or a fake USB listing. The
// source opens the pty's slave through go.bug.st/serial, so real termios
// calls are made. Unplug closes the pty; Replug makes a new one (with a new
// /dev/pts name) and re-points the symlink.
type ptyDev struct {
	t    *testing.T
	link string

	mu     sync.Mutex
	master *os.File
	slave  *os.File
	got    bytes.Buffer // what the source wrote to the device
	opens  int          // ptys made so far
	done   chan struct{}
}

func newPtyDev(t *testing.T) *ptyDev {
	p := &ptyDev{t: t, link: filepath.Join(t.TempDir(), "ttyDUT")}
	p.plug()
	return p
}

func (p *ptyDev) plug() {
	m0, s, err := pty.Open()
	if err != nil {
		p.t.Fatalf("pty: %v", err)
	}
	// A non-blocking descriptor, so that Close interrupts the reader.
	fd, err := unix.Dup(int(m0.Fd()))
	if err != nil {
		p.t.Fatal(err)
	}
	m0.Close()
	if err := unix.SetNonblock(fd, true); err != nil {
		p.t.Fatal(err)
	}
	m := os.NewFile(uintptr(fd), "ptmx")
	tmp := p.link + ".new"
	os.Remove(tmp)
	if err := os.Symlink(s.Name(), tmp); err != nil {
		p.t.Fatal(err)
	}
	if err := os.Rename(tmp, p.link); err != nil {
		p.t.Fatal(err)
	}
	done := make(chan struct{})
	p.mu.Lock()
	p.master, p.slave, p.done = m, s, done
	p.got.Reset()
	p.opens++
	p.mu.Unlock()
	go func() {
		defer close(done)
		buf := make([]byte, 4096)
		for {
			n, err := m.Read(buf)
			p.mu.Lock()
			p.got.Write(buf[:n])
			p.mu.Unlock()
			if err != nil {
				return
			}
		}
	}()
}

// slaveName is the current /dev/pts path.
func (p *ptyDev) slaveName() string {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.slave.Name()
}

// written returns what the source wrote to the current pty.
func (p *ptyDev) written() string {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.got.String()
}

func (p *ptyDev) write(t *testing.T, b []byte) {
	p.mu.Lock()
	m := p.master
	p.mu.Unlock()
	if _, err := m.Write(b); err != nil {
		t.Fatalf("write pty: %v", err)
	}
}

func (p *ptyDev) Unplug(t *testing.T) {
	p.mu.Lock()
	m, s, done := p.master, p.slave, p.done
	p.mu.Unlock()
	m.Close()
	<-done
	s.Close()
}

func (p *ptyDev) Replug(t *testing.T) { p.plug() }

func (p *ptyDev) Close() {
	p.mu.Lock()
	m, s, done := p.master, p.slave, p.done
	p.mu.Unlock()
	m.Close()
	<-done
	s.Close()
}

// textDriver writes "seq N" lines with CR LF to a pty.
type textDriver struct{ *ptyDev }

func (d textDriver) Send(t *testing.T, from, n int) {
	var b []byte
	for i := from; i < from+n; i++ {
		b = append(b, "seq "...)
		b = strconv.AppendInt(b, int64(i), 10)
		b = append(b, "\r\n"...)
	}
	d.write(t, b)
}

func (d textDriver) Seq(m bus.Message) (int, bool) {
	s, ok := strings.CutPrefix(m.Text, "seq ")
	if m.Kind != bus.KindLine || !ok {
		return 0, false
	}
	n, err := strconv.Atoi(s)
	return n, err == nil
}

// seqFrame carries sequence number i in data bytes 0..3.
func seqFrame(i int) can.Frame {
	f := can.Frame{ID: 0x100, Length: 8}
	binary.LittleEndian.PutUint32(f.Data[:4], uint32(i))
	f.Data[7] = 0xA5
	return f
}

func frameSeq(m bus.Message) (int, bool) {
	if m.Kind != bus.KindCAN || m.Frame.ID != 0x100 || m.Frame.Length != 8 || m.Frame.Data[7] != 0xA5 {
		return 0, false
	}
	return int(binary.LittleEndian.Uint32(m.Frame.Data[:4])), true
}

// slcanDriver answers like a serial-line CAN adapter: it sends frames only
// after the source has written its open sequence.
type slcanDriver struct {
	*ptyDev
	openSeq string
}

func (d slcanDriver) Send(t *testing.T, from, n int) {
	waitUntil(t, "the open sequence", func() bool { return strings.Contains(d.written(), d.openSeq) })
	var b []byte
	for i := from; i < from+n; i++ {
		b = bus.AppendSLCAN(b, seqFrame(i))
	}
	d.write(t, b)
}

func (d slcanDriver) Seq(m bus.Message) (int, bool) { return frameSeq(m) }

// tcpDriver is a tcp-can gateway on loopback.
type tcpDriver struct {
	mu   sync.Mutex
	srv  *bus.TCPCANServer
	addr string
}

func newTCPDriver(t *testing.T) *tcpDriver {
	srv, err := bus.ListenTCPCAN("127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	return &tcpDriver{srv: srv, addr: srv.Addr()}
}

func (d *tcpDriver) server() *bus.TCPCANServer {
	d.mu.Lock()
	defer d.mu.Unlock()
	return d.srv
}

func (d *tcpDriver) Send(t *testing.T, from, n int) {
	srv := d.server()
	waitUntil(t, "a tcp-can client", func() bool { return srv.Clients() > 0 })
	fs := make([]can.Frame, 0, n)
	for i := from; i < from+n; i++ {
		fs = append(fs, seqFrame(i))
	}
	if srv.WriteFrames(fs) == 0 {
		t.Fatal("no client took the frames")
	}
}

func (d *tcpDriver) Seq(m bus.Message) (int, bool) { return frameSeq(m) }
func (d *tcpDriver) Unplug(t *testing.T)           { d.server().Close() }
func (d *tcpDriver) Replug(t *testing.T) {
	var srv *bus.TCPCANServer
	waitUntil(t, "listening again on "+d.addr, func() bool {
		var err error
		srv, err = bus.ListenTCPCAN(d.addr)
		return err == nil
	})
	d.mu.Lock()
	d.srv = srv
	d.mu.Unlock()
}
func (d *tcpDriver) Close() { d.server().Close() }
