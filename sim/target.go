package sim

import (
	"context"
	"encoding/binary"
	"fmt"
	"io"
	"sync"
	"time"

	"packwatch/bus"
)

// Format is how a TargetSink writes messages.
type Format uint8

// Target formats.
const (
	// FormatCapture writes packwatch's capture format (bus.AppendCapture),
	// every source, with a "# start" line first.
	FormatCapture Format = iota + 1
	// FormatText writes console lines ended by CR LF, as a serial console.
	FormatText
	// FormatSLCAN writes frames as ASCII serial-line CAN lines
	// (bus.AppendSLCAN), and the text of a line message on the same source
	// as it is (the garbage fault's bytes).
	FormatSLCAN
	// FormatFrame16 writes frames in the 16-byte SocketCAN layout, ID
	// little-endian, as the tcp-can source reads them (bus.AppendFrame16).
	FormatFrame16
)

// TargetOptions configure a TargetSink.
type TargetOptions struct {
	Format Format
	// Sources are the message sources written (by index); nil: every source
	// whose messages the format can carry.
	Sources []uint16
	// Names are the profile's source names by index (capture format).
	Names []string
	// Start is the capture's start, data time in ns (capture format).
	Start int64
	// Rate, when above 0, writes Rate messages per second of wall time and
	// restamps their data time to Start + k/Rate: a load generator. 0 writes
	// messages as they are delivered, with their own time.
	Rate float64
	// For, with Rate, stops after this much restamped time: the sink calls
	// Stop. 0: no end.
	For time.Duration
	// Stop is called once when the sink wants the run to end (a write
	// error, or For reached in rate mode). Usually a context's cancel.
	Stop func()
	// Ctx ends rate-mode waits early; nil means never.
	Ctx context.Context
	// Now and Sleep are the wall clock for rate mode; nil: time.Now and a
	// timer. Tests inject their own.
	Now   func() time.Time
	Sleep func(ctx context.Context, d time.Duration) error
}

// TargetSink is a bus.Sink that writes what the simulator delivers to an
// io.Writer (a capture file, a serial port, TCP clients) in one of the
// formats the bus sources read. It buffers each batch into one write.
type TargetSink struct {
	w   io.Writer
	opt TargetOptions
	src map[uint16]bool

	mu       sync.Mutex
	buf      []byte
	err      error
	written  uint64
	stopped  bool
	started  bool
	rateT0   time.Time
	lastData int64
}

// NewTargetSink writes to w.
func NewTargetSink(w io.Writer, opt TargetOptions) *TargetSink {
	t := &TargetSink{w: w, opt: opt}
	if opt.Sources != nil {
		t.src = map[uint16]bool{}
		for _, s := range opt.Sources {
			t.src[s] = true
		}
	}
	if t.opt.Now == nil {
		t.opt.Now = time.Now
	}
	if t.opt.Sleep == nil {
		t.opt.Sleep = sleepCtx
	}
	if t.opt.Ctx == nil {
		t.opt.Ctx = context.Background()
	}
	return t
}

func sleepCtx(ctx context.Context, d time.Duration) error {
	tm := time.NewTimer(d)
	defer tm.Stop()
	select {
	case <-tm.C:
		return nil
	case <-ctx.Done():
		return ctx.Err()
	}
}

// carries reports whether the format writes a message of this kind.
func (t *TargetSink) carries(m *bus.Message) bool {
	if t.src != nil && !t.src[m.Src] {
		return false
	}
	switch t.opt.Format {
	case FormatCapture:
		return m.Kind == bus.KindCAN || m.Kind == bus.KindLine || m.Kind == bus.KindGap
	case FormatText:
		return m.Kind == bus.KindLine
	case FormatSLCAN:
		return m.Kind == bus.KindCAN || m.Kind == bus.KindLine // a line: garbage bytes
	case FormatFrame16:
		return m.Kind == bus.KindCAN
	}
	return false
}

func (t *TargetSink) append(m *bus.Message) {
	switch t.opt.Format {
	case FormatCapture:
		name := fmt.Sprintf("src%d", m.Src)
		if int(m.Src) < len(t.opt.Names) {
			name = t.opt.Names[m.Src]
		}
		t.buf = bus.AppendCapture(t.buf, m, t.opt.Start, name)
	case FormatText:
		t.buf = append(t.buf, m.Text...)
		t.buf = append(t.buf, '\r', '\n')
	case FormatSLCAN:
		if m.Kind == bus.KindLine {
			t.buf = append(t.buf, m.Text...)
			t.buf = append(t.buf, '\r')
			break
		}
		t.buf = bus.AppendSLCAN(t.buf, m.Frame)
	case FormatFrame16:
		t.buf = bus.AppendFrame16(t.buf, m.Frame, binary.LittleEndian)
	}
}

// Deliver writes a batch (bus.Sink).
func (t *TargetSink) Deliver(batch []bus.Message) {
	t.mu.Lock()
	defer t.mu.Unlock()
	if t.stopped {
		return
	}
	if !t.started {
		t.started = true
		t.rateT0 = t.opt.Now()
		if t.opt.Format == FormatCapture {
			t.buf = fmt.Appendf(t.buf, "# start %s\n# simulated by packwatch: invented data, not a real pack\n",
				time.Unix(0, t.opt.Start).UTC().Format(time.RFC3339Nano))
		}
	}
	if t.opt.Rate <= 0 {
		for i := range batch {
			if t.carries(&batch[i]) {
				t.append(&batch[i])
				t.written++
				t.lastData = batch[i].T
			}
		}
		t.flush()
		return
	}
	// rate mode: restamp and pace, writing at least every 2 ms of schedule
	step := float64(time.Second) / t.opt.Rate
	for i := range batch {
		if !t.carries(&batch[i]) {
			continue
		}
		at := time.Duration(float64(t.written) * step)
		if t.opt.For > 0 && at >= t.opt.For {
			t.flush()
			t.stop()
			return
		}
		if wait := t.rateT0.Add(at).Sub(t.opt.Now()); wait > 2*time.Millisecond {
			if t.flush(); t.stopped {
				return
			}
			if t.opt.Sleep(t.opt.Ctx, wait) != nil {
				t.stop()
				return
			}
		}
		m := batch[i]
		m.T = t.opt.Start + int64(at)
		t.append(&m)
		t.written++
		t.lastData = m.T
	}
	t.flush()
}

// flush writes the buffer; a write error stops the run. Called with mu held.
func (t *TargetSink) flush() {
	if len(t.buf) == 0 || t.err != nil {
		t.buf = t.buf[:0]
		return
	}
	if _, err := t.w.Write(t.buf); err != nil {
		t.err = fmt.Errorf("write: %w", err)
		t.stop()
	}
	t.buf = t.buf[:0]
}

func (t *TargetSink) stop() {
	if !t.stopped {
		t.stopped = true
		if t.opt.Stop != nil {
			t.opt.Stop()
		}
	}
}

// Status ignores connection changes (bus.Sink): a target has nothing to say
// about them.
func (t *TargetSink) Status(bus.Status) {}

// Err is the first write error, if any.
func (t *TargetSink) Err() error {
	t.mu.Lock()
	defer t.mu.Unlock()
	return t.err
}

// Written counts the messages written.
func (t *TargetSink) Written() uint64 {
	t.mu.Lock()
	defer t.mu.Unlock()
	return t.written
}

// LastT is the data time of the latest message written, ns.
func (t *TargetSink) LastT() int64 {
	t.mu.Lock()
	defer t.mu.Unlock()
	return t.lastData
}
