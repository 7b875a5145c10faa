package bus

import (
	"context"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"
)

// Source kinds accepted in Spec.Kind.
const (
	KindSocketCAN  = "socketcan"
	KindSerialCAN  = "serial-can"
	KindSerialText = "serial-text"
	KindTCPCAN     = "tcp-can"
)

// Spec says which source to open and how. cmd/packwatch fills it from a
// profile's [[source]]; zero values mean the documented defaults.
type Spec struct {
	Index  uint16 // copied into Message.Src and Status.Src
	Name   string // the profile's name for the source, for messages
	Kind   string // "socketcan" | "serial-can" | "serial-text" | "tcp-can"
	Device string // interface name, port path or name, "usb:VID:PID[:SERIAL]", or host:port for tcp-can

	// Serial line settings; defaults 115200 baud, 8 data bits, parity
	// "none" (or "even", "odd", "mark", "space"; N, E, O, M, S), stop bits
	// "1" (or "1.5", "2").
	Baud     int
	DataBits int
	Parity   string
	StopBits string

	// Bitrate is the CAN bitrate in bit/s a serial-can adapter is set to
	// (S0..S8); 0 keeps the adapter's own setting. For socketcan it is only
	// compared with the interface's bitrate and reported.
	Bitrate int
	// Normal opens a serial-can adapter in normal mode (it acknowledges
	// frames). The default, false, is listen-only. A socketcan interface's
	// mode is set on the interface itself; a mismatch is reported.
	Normal bool

	// Clock stamps messages; nil means a new LiveClock.
	Clock Clock

	// RetryMin and RetryMax bound the reconnect backoff, which doubles from
	// RetryMin up to RetryMax (defaults 250 ms and 2 s).
	RetryMin, RetryMax time.Duration
	// Sleep waits between reconnect attempts; nil means a timer. It must
	// return early with ctx.Err() when ctx is done. Tests inject their own.
	Sleep func(ctx context.Context, d time.Duration) error
	// BatchWait is how long a source waits after a read before the next one,
	// so that one wake-up reads many frames (default 5 ms; negative: none).
	BatchWait time.Duration
	// Quiet is how long a connected source may see no bytes before it says
	// so in its status (default 5 s).
	Quiet time.Duration
	// Ports lists serial ports for usb:VID:PID[:SERIAL] names; nil means
	// ListPorts.
	Ports func() ([]PortInfo, error)
}

// Source is one device feeding the engine. Run connects, reads and delivers
// to sink until ctx is cancelled, reconnecting by itself when the device goes
// away; it returns nil on cancel, and no goroutine of it remains after it
// returns. Run must be called at most once.
//
// The contract every source keeps (checked by package bustest): statuses
// start with StateConnecting, StateConnected comes before any message,
// StateDisconnected carries the reason when the device is lost, StateStopped
// comes last and once; messages arrive in order with non-decreasing T; after
// a reconnect, a suspend or a clock step a KindGap message precedes the next
// data.
type Source interface {
	Run(ctx context.Context, sink Sink) error
}

// ErrSpec is wrapped by every error Open returns for a bad Spec.
var ErrSpec = errors.New("bad source")

// Open checks spec and returns its source, not yet connected. The Source
// returned also has a method Stats() Stats, safe to call while it runs.
func Open(spec Spec) (Source, error) {
	name := spec.Name
	if name == "" {
		name = spec.Device
	}
	bad := func(format string, a ...any) error {
		return fmt.Errorf("source %q: %s: %w", name, fmt.Sprintf(format, a...), ErrSpec)
	}
	if strings.TrimSpace(spec.Device) == "" {
		return nil, bad("no device")
	}
	spec = spec.withDefaults()
	switch spec.Kind {
	case KindSocketCAN:
		a, err := newSocketCANAdapter(spec)
		if err != nil {
			return nil, bad("%v", err)
		}
		return newRunner(spec, a), nil
	case KindSerialCAN:
		if _, err := serialMode(spec); err != nil {
			return nil, bad("%v", err)
		}
		if _, err := SLCANOpenSequence(spec.Bitrate, spec.Normal); err != nil {
			return nil, bad("%v", err)
		}
		if err := checkUSBName(spec.Device); err != nil {
			return nil, bad("%v", err)
		}
		return newRunner(spec, newSerialCANAdapter(spec)), nil
	case KindSerialText:
		if _, err := serialMode(spec); err != nil {
			return nil, bad("%v", err)
		}
		if err := checkUSBName(spec.Device); err != nil {
			return nil, bad("%v", err)
		}
		return newRunner(spec, newSerialTextAdapter(spec)), nil
	case KindTCPCAN:
		if !strings.Contains(spec.Device, ":") {
			return nil, bad("tcp-can device %q is not host:port", spec.Device)
		}
		return newRunner(spec, newTCPCANAdapter(spec)), nil
	case "":
		return nil, bad("no kind (socketcan, serial-can, serial-text or tcp-can)")
	}
	return nil, bad("unknown kind %q (socketcan, serial-can, serial-text or tcp-can)", spec.Kind)
}

func (s Spec) withDefaults() Spec {
	if s.Baud == 0 {
		s.Baud = 115200
	}
	if s.DataBits == 0 {
		s.DataBits = 8
	}
	if s.RetryMin <= 0 {
		s.RetryMin = 250 * time.Millisecond
	}
	if s.RetryMax <= 0 {
		s.RetryMax = 2 * time.Second
	}
	if s.RetryMax < s.RetryMin {
		s.RetryMax = s.RetryMin
	}
	if s.Sleep == nil {
		s.Sleep = sleepCtx
	}
	if s.BatchWait == 0 {
		s.BatchWait = 5 * time.Millisecond
	}
	if s.Quiet <= 0 {
		s.Quiet = 5 * time.Second
	}
	if s.Ports == nil {
		s.Ports = ListPorts
	}
	if s.Clock == nil {
		s.Clock = NewLiveClock()
	}
	return s
}

func sleepCtx(ctx context.Context, d time.Duration) error {
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-t.C:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

// Stats are a source's counters since it started, for diagnostics and the
// page. They only grow, except Overrun and Hint, which describe the present.
type Stats struct {
	Bytes       uint64 // bytes read from the device
	Messages    uint64 // frames and lines delivered
	ErrorFrames uint64 // CAN error frames (socketcan, tcp-can)
	Bad         uint64 // malformed frames or lines, and bytes of bad text, skipped or replaced
	Cut         uint64 // text lines over MaxLine bytes, cut
	Replies     uint64 // serial-can adapter replies that are not frames
	Refusals    uint64 // serial-can commands the adapter refused (BEL)
	Gaps        uint64 // KindGap messages delivered
	Reconnects  uint64 // successful connections after the first
	Overrun     bool   // the serial line is saturated: frames are being lost
	Hint        string // the current diagnostic in words, "" when all is well
}

// summary gives the main counters in words: "1204 messages, 3 bad, 2 CAN
// error frames, 8431 bytes".
func (s Stats) summary() string {
	var b strings.Builder
	b.WriteString(strconv.FormatUint(s.Messages, 10) + " messages")
	if s.Bad > 0 {
		b.WriteString(", " + strconv.FormatUint(s.Bad, 10) + " bad")
	}
	if s.ErrorFrames > 0 {
		b.WriteString(", " + strconv.FormatUint(s.ErrorFrames, 10) + " CAN error frames")
	}
	if s.Cut > 0 {
		b.WriteString(", " + strconv.FormatUint(s.Cut, 10) + " long lines cut")
	}
	b.WriteString(", " + strconv.FormatUint(s.Bytes, 10) + " bytes")
	return b.String()
}
