//go:build linux

package bus_test

import (
	"context"
	"encoding/binary"
	"errors"
	"net"
	"os"
	"strings"
	"sync"
	"syscall"
	"testing"

	"go.einride.tech/can"
	"go.einride.tech/can/pkg/socketcan"
	"golang.org/x/sys/unix"

	"packwatch/bus"
	"packwatch/bus/bustest"
)

// pairDriver stands in for a CAN_RAW socket with socketpair(AF_UNIX,
// SOCK_SEQPACKET), which keeps frame boundaries as CAN_RAW does. The far end
// is written with einride's socketcan.Transmitter, so the 16-byte frames
// are laid out by an implementation other than ours. Unplug closes the far
// end (the source reads EOF); while unplugged the dial fails as for a missing
// interface.
type pairDriver struct {
	mu      sync.Mutex
	plugged bool
	peer    net.Conn
	dials   int
}

func (d *pairDriver) dial(context.Context) (*os.File, error) {
	d.mu.Lock()
	defer d.mu.Unlock()
	if !d.plugged {
		return nil, errors.New("open vcan9: no such network interface")
	}
	fds, err := unix.Socketpair(unix.AF_UNIX, unix.SOCK_SEQPACKET|unix.SOCK_NONBLOCK|unix.SOCK_CLOEXEC, 0)
	if err != nil {
		return nil, err
	}
	pf := os.NewFile(uintptr(fds[1]), "peer")
	peer, err := net.FileConn(pf)
	pf.Close()
	if err != nil {
		unix.Close(fds[0])
		return nil, err
	}
	if d.peer != nil {
		d.peer.Close()
	}
	d.peer = peer
	d.dials++
	return os.NewFile(uintptr(fds[0]), "can-test"), nil
}

func (d *pairDriver) conn() net.Conn {
	d.mu.Lock()
	defer d.mu.Unlock()
	return d.peer
}

func (d *pairDriver) send(t *testing.T, fs ...can.Frame) {
	var c net.Conn
	waitUntil(t, "the source to open its socket", func() bool { c = d.conn(); return c != nil })
	tx := socketcan.NewTransmitter(c)
	for _, f := range fs {
		if err := tx.TransmitFrame(context.Background(), f); err != nil {
			t.Fatalf("transmit: %v", err)
		}
	}
}

func (d *pairDriver) Send(t *testing.T, from, n int) {
	fs := make([]can.Frame, 0, n)
	for i := from; i < from+n; i++ {
		fs = append(fs, seqFrame(i))
	}
	d.send(t, fs...)
}

func (d *pairDriver) Seq(m bus.Message) (int, bool) { return frameSeq(m) }

func (d *pairDriver) Unplug(t *testing.T) {
	d.mu.Lock()
	defer d.mu.Unlock()
	d.plugged = false
	if d.peer != nil {
		d.peer.Close()
		d.peer = nil
	}
}

func (d *pairDriver) Replug(t *testing.T) {
	d.mu.Lock()
	d.plugged = true
	d.mu.Unlock()
}

func (d *pairDriver) Close() { d.Unplug(nil) }

func newPairSource(t *testing.T) (bus.Source, *pairDriver) {
	d := &pairDriver{plugged: true}
	spec := testSpec(bus.KindSocketCAN, "vcan9")
	return bus.NewSocketCANSourceWithDial(spec, d.dial), d
}

func TestConformanceSocketCANFramePath(t *testing.T) {
	bustest.Run(t, bustest.Harness{New: func(t *testing.T) (bus.Source, bustest.Driver) {
		return newPairSource(t)
	}})
}

// Error frames: can_id with CAN_ERR_FLAG (include/uapi/linux/can/error.h),
// here CAN_ERR_CRTL 0x04 with data[1] CAN_ERR_CRTL_RX_WARNING 0x04. They
// arrive as KindError with the class bits kept, and are counted.
func TestSocketCANErrorFrames(t *testing.T) {
	src, d := newPairSource(t)
	defer d.Close()
	ctx, cancel := context.WithCancel(context.Background())
	rec := bustest.NewRecorder()
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx, rec) }()
	defer func() { cancel(); <-done }()
	rec.WaitStatus(t, bus.StateConnected, 1)
	c := func() net.Conn {
		var c net.Conn
		waitUntil(t, "socket", func() bool { c = d.conn(); return c != nil })
		return c
	}()
	errFrame := []byte{0x04, 0x00, 0x00, 0x20, 8, 0, 0, 0, 0, 0x04, 0, 0, 0, 0, 0, 0}
	if _, err := c.Write(errFrame); err != nil {
		t.Fatal(err)
	}
	d.Send(t, 0, 1)
	rec.WaitFor(t, "error frame and data frame", func(ev []bustest.Event) bool {
		n := 0
		for _, e := range ev {
			if e.IsMsg {
				n++
			}
		}
		return n >= 2
	})
	msgs := rec.Messages()
	if msgs[0].Kind != bus.KindError || msgs[0].Frame.ID != 0x04 || msgs[0].Frame.Data[1] != 0x04 {
		t.Errorf("error frame decoded as %+v", msgs[0])
	}
	if s, ok := frameSeq(msgs[1]); !ok || s != 0 {
		t.Errorf("data frame decoded as %+v", msgs[1])
	}
	st := src.(interface{ Stats() bus.Stats }).Stats()
	if st.ErrorFrames != 1 || st.Messages != 2 {
		t.Errorf("stats %+v", st)
	}
	rec.WaitFor(t, "an error frame hint in words", func(ev []bustest.Event) bool {
		for _, e := range ev {
			if !e.IsMsg && strings.Contains(e.Status.Reason, "CAN error frames: error-warning (1 in") {
				return true
			}
		}
		return false
	})
	// packwatch never writes to a CAN socket: nothing is queued on the far
	// end (one non-blocking read, which reports EAGAIN when empty).
	rc, err := c.(syscall.Conn).SyscallConn()
	if err != nil {
		t.Fatal(err)
	}
	var n int
	var rerr error
	if err := rc.Read(func(fd uintptr) bool {
		n, rerr = unix.Read(int(fd), make([]byte, 64))
		return true
	}); err != nil {
		t.Fatal(err)
	}
	if !errors.Is(rerr, unix.EAGAIN) {
		t.Errorf("the source wrote to its socket: read %d bytes, %v", n, rerr)
	}
}

// TestSocketCANVcan runs against a real vcan interface where the kernel has
// one (ip link add vcan0 type vcan; ip link set vcan0 up), writing with
// einride's raw dial from another socket.
func TestSocketCANVcan(t *testing.T) {
	iface := os.Getenv("PACKWATCH_VCAN")
	if iface == "" {
		iface = "vcan0"
	}
	// A kernel without CAN cannot have the interface: always a skip. A
	// kernel with CAN but no vcan set up is a skip CI can avoid.
	fd, err := unix.Socket(unix.AF_CAN, unix.SOCK_RAW, unix.CAN_RAW)
	if err != nil {
		t.Skipf("this kernel has no CAN support (socket(AF_CAN): %v)", err)
	}
	unix.Close(fd)
	if _, err := net.InterfaceByName(iface); err != nil {
		skipOrFail(t, "no "+iface+" interface (ip link add "+iface+" type vcan && ip link set "+iface+" up; or set PACKWATCH_VCAN): "+err.Error())
	}
	src, err := bus.Open(testSpec(bus.KindSocketCAN, iface))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	rec := bustest.NewRecorder()
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx, rec) }()
	defer func() { cancel(); <-done }()
	rec.WaitStatus(t, bus.StateConnected, 1)
	conn, err := socketcan.DialContext(ctx, "can", iface)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	tx := socketcan.NewTransmitter(conn)
	for i := 0; i < 100; i++ {
		if err := tx.TransmitFrame(ctx, seqFrame(i)); err != nil {
			t.Fatal(err)
		}
	}
	rec.WaitFor(t, "100 frames", func(ev []bustest.Event) bool {
		n := 0
		for _, e := range ev {
			if e.IsMsg {
				if s, ok := frameSeq(e.Msg); ok && s == n {
					n++
				}
			}
		}
		return n == 100
	})
}

// Our 16-byte encoder, read back by einride's socketcan.Receiver over a
// SOCK_SEQPACKET socketpair (one datagram per frame, as on CAN_RAW), with
// the REFERENCES.md frames (include/uapi/linux/can.h layout).
func TestFrame16ThroughEinrideReceiver(t *testing.T) {
	fds, err := unix.Socketpair(unix.AF_UNIX, unix.SOCK_SEQPACKET|unix.SOCK_CLOEXEC, 0)
	if err != nil {
		t.Fatal(err)
	}
	w := os.NewFile(uintptr(fds[0]), "w")
	r := os.NewFile(uintptr(fds[1]), "r")
	want := []can.Frame{
		{ID: 0x456, Length: 3, Data: can.Data{0x11, 0x22, 0x33}},
		{ID: 0x12ABCDEF, IsExtended: true, Length: 2, Data: can.Data{0xAA, 0x55}},
		{ID: 0x123, IsRemote: true},
	}
	for _, f := range want {
		if _, err := w.Write(bus.AppendFrame16(nil, f, binary.NativeEndian)); err != nil {
			t.Fatal(err)
		}
	}
	w.Close()
	rx := socketcan.NewReceiver(r)
	defer rx.Close()
	var got []can.Frame
	for rx.Receive() {
		got = append(got, rx.Frame())
	}
	if len(got) != len(want) {
		t.Fatalf("received %d frames: %+v", len(got), got)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("frame %d: %+v, want %+v", i, got[i], want[i])
		}
	}
}
