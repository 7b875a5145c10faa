//go:build linux

package bus

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"net"
	"os"
	"syscall"
	"time"

	"golang.org/x/sys/unix"
)

// socketCANAdapter reads a SocketCAN interface through a CAN_RAW socket. It
// never writes to the socket. Error frames are asked for (CAN_RAW_ERR_FILTER)
// and delivered as KindError. The interface's own mode and state are read
// over netlink when the kernel allows and shown in the status.
type socketCANAdapter struct {
	spec    Spec
	dial    func(ctx context.Context) (*os.File, error)
	dec     frame16Decoder
	lastErr uint64
}

func newSocketCANAdapter(spec Spec) (adapter, error) {
	a := &socketCANAdapter{spec: spec, dec: frame16Decoder{order: binary.NativeEndian}}
	a.dial = func(context.Context) (*os.File, error) { return dialCANRaw(spec.Device) }
	return a, nil
}

// dialCANRaw opens a non-blocking CAN_RAW socket bound to iface, receiving
// error frames.
func dialCANRaw(iface string) (*os.File, error) {
	ifi, err := net.InterfaceByName(iface)
	if err != nil {
		return nil, fmt.Errorf("open %s: %w", iface, err)
	}
	fd, err := unix.Socket(unix.AF_CAN, unix.SOCK_RAW|unix.SOCK_NONBLOCK|unix.SOCK_CLOEXEC, unix.CAN_RAW)
	if err != nil {
		return nil, fmt.Errorf("open %s: CAN socket: %w (is the can module loaded?)", iface, err)
	}
	if err := unix.SetsockoptInt(fd, unix.SOL_CAN_RAW, unix.CAN_RAW_ERR_FILTER, unix.CAN_ERR_MASK); err != nil {
		unix.Close(fd)
		return nil, fmt.Errorf("open %s: error frame filter: %w", iface, err)
	}
	if err := unix.Bind(fd, &unix.SockaddrCAN{Ifindex: ifi.Index}); err != nil {
		unix.Close(fd)
		return nil, fmt.Errorf("open %s: bind: %w", iface, err)
	}
	return os.NewFile(uintptr(fd), "can:"+iface), nil
}

func (a *socketCANAdapter) connect(ctx context.Context, idle time.Duration) (link, string, error) {
	f, err := a.dial(ctx)
	if err != nil {
		return nil, "", err
	}
	l, err := newDatagramLink(f, idle)
	if err != nil {
		f.Close()
		return nil, "", fmt.Errorf("open %s: %w", a.spec.Device, err)
	}
	return l, describeCANInterface(a.spec.Device, a.spec.Bitrate, a.spec.Normal), nil
}

// describeCANInterface says how the interface is set up, in words.
// The interface's mode is set on the interface itself (ip link set NAME type
// can listen-only on|off); packwatch only reports a mismatch with the profile.
func describeCANInterface(name string, want int, wantNormal bool) string {
	ci, err := readCANInterface(name)
	if err != nil {
		return name + " (mode and state not readable: " + err.Error() + ")"
	}
	s := name + ": " + ci.Describe()
	if want != 0 && ci.Bitrate != 0 && ci.Bitrate != want {
		s += fmt.Sprintf("; the profile says %d kbit/s", want/1000)
	}
	switch {
	case ci.Mode == "normal" && !wantNormal:
		s += "; normal mode: the interface acknowledges frames (packwatch itself never transmits); for listen-only: ip link set " + name + " type can listen-only on"
	case ci.Mode == "listen-only" && wantNormal:
		s += "; the profile asks for normal mode but the interface is listen-only: on a bench where the BMS is the only other node, nothing acknowledges its frames"
	}
	return s
}

func (a *socketCANAdapter) decode(p []byte, t int64, src uint16, out []Message) []Message {
	return a.dec.feed(p, t, src, out)
}

func (a *socketCANAdapter) reset()        { a.dec.reset() }
func (a *socketCANAdapter) shutdown(link) {}

func (a *socketCANAdapter) counts(st *Stats) (good, bad uint64) {
	st.Bad, st.ErrorFrames = a.dec.bad, a.dec.errs
	return a.dec.frames + a.dec.errs, a.dec.bad
}

func (a *socketCANAdapter) hint(w window) string {
	before := a.lastErr
	h := frameHint(w, &a.lastErr, &a.dec)
	if a.lastErr != before {
		// Error frames arrived: say what state the controller is in now.
		if ci, err := readCANInterface(a.spec.Device); err == nil && ci.State != "" {
			h += "; interface " + ci.State
		}
	}
	return h
}

// datagramLink reads a socket where each datagram is one 16-byte frame
// (CAN_RAW, or SOCK_SEQPACKET in tests). One Read drains every frame already
// queued, with one non-blocking read(2) per frame, so a wake-up after the
// batch wait carries them all; it blocks only while the queue is empty, up to
// the idle interval.
type datagramLink struct {
	f    *os.File
	rc   syscall.RawConn
	idle time.Duration
}

func newDatagramLink(f *os.File, idle time.Duration) (*datagramLink, error) {
	rc, err := f.SyscallConn()
	if err != nil {
		return nil, err
	}
	return &datagramLink{f: f, rc: rc, idle: idle}, nil
}

func (l *datagramLink) Read(p []byte) (int, error) {
	if err := l.f.SetReadDeadline(time.Now().Add(l.idle)); err != nil {
		return 0, fmt.Errorf("read: %w", err)
	}
	n := 0
	var rerr error
	err := l.rc.Read(func(fd uintptr) bool {
		for len(p)-n >= FrameSize {
			k, err := unix.Read(int(fd), p[n:n+FrameSize])
			switch {
			case err == unix.EINTR:
				continue
			case err == unix.EAGAIN:
				return n > 0 // false: wait until readable
			case err != nil:
				rerr = err
				return true
			case k == 0:
				rerr = io.EOF
				return true
			case k < FrameSize:
				// A short datagram: mark it malformed (length 0xFF).
				clear(p[n+k : n+FrameSize])
				p[n+4] = 0xFF
			}
			n += FrameSize
		}
		return true
	})
	switch {
	case rerr != nil:
		if rerr == io.EOF {
			return n, errors.New("socket closed by the other end")
		}
		return n, fmt.Errorf("read: %w", rerr)
	case err == nil:
		return n, nil
	case errors.Is(err, os.ErrDeadlineExceeded):
		return n, nil
	}
	return n, fmt.Errorf("read: %w", err)
}

func (l *datagramLink) Close() error { return l.f.Close() }
