package sim

import (
	"bytes"
	"context"
	"encoding/binary"
	"fmt"
	"net"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
	"packwatch/decode"
)

// recordSink keeps a copy of every message delivered.
type recordSink struct{ msgs []bus.Message }

func (r *recordSink) Deliver(b []bus.Message) { r.msgs = append(r.msgs, b...) }
func (r *recordSink) Status(bus.Status)       {}

// tee delivers to several sinks.
type tee []bus.Sink

func (t tee) Deliver(b []bus.Message) {
	for _, s := range t {
		s.Deliver(b)
	}
}
func (t tee) Status(st bus.Status) {
	for _, s := range t {
		s.Status(st)
	}
}

func simulate(t *testing.T, d time.Duration, sinks ...bus.Sink) []bus.Message {
	t.Helper()
	s, _ := newBuoySim(t, Options{Speed: SpeedMax, For: d, Seed: 5})
	rec := &recordSink{}
	if err := s.Run(context.Background(), tee(append(sinks, rec))); err != nil {
		t.Fatal(err)
	}
	return rec.msgs
}

// A capture written by the sink reads back through the capture parser to the
// same messages (times to the microsecond).
func TestTargetCapture(t *testing.T) {
	dm := loadMap(t, buoyProfile)
	var buf bytes.Buffer
	names := []string{"bms", "console"}
	ts := NewTargetSink(&buf, TargetOptions{Format: FormatCapture, Names: names, Start: t0.UnixNano()})
	sent := simulate(t, 20*time.Second, ts)
	if ts.Err() != nil || int(ts.Written()) != len(sent) {
		t.Fatalf("written %d of %d, err %v", ts.Written(), len(sent), ts.Err())
	}
	if !bytes.HasPrefix(buf.Bytes(), []byte("# start 2026-05-01T08:00:00Z\n")) {
		t.Errorf("capture begins %q", buf.Bytes()[:40])
	}
	r := bus.NewCaptureReader(&buf, func(name string) (int, bool) {
		for i, n := range names {
			if n == name {
				return i, true
			}
		}
		return 0, false
	})
	k := 0
	v := decode.NewValues(dm)
	for r.Scan() {
		m := r.Message()
		if k >= len(sent) {
			t.Fatal("more messages read than sent")
		}
		want := sent[k]
		if m.Src != want.Src || m.Kind != want.Kind || m.Text != want.Text || m.Frame != want.Frame || abs64(m.T-want.T) > 1000 {
			t.Fatalf("message %d: read %+v, sent %+v", k, m, want)
		}
		dm.Decode(&m, v)
		k++
	}
	if r.Err() != nil || r.Malformed != 0 || k != len(sent) {
		t.Fatalf("read %d of %d, %d malformed, err %v", k, len(sent), r.Malformed, r.Err())
	}
	if v.Src[0].Unknown+v.Src[0].DecodeErrors+v.Src[1].Unknown+v.Src[1].DecodeErrors != 0 {
		t.Errorf("decoding the capture: %+v %+v", v.Src[0], v.Src[1])
	}
}

func abs64(x int64) int64 {
	if x < 0 {
		return -x
	}
	return x
}

// slcan lines and 16-byte frames read back through the bus package's own
// decoders to the frames sent; console text through its line scanner.
func TestTargetDeviceFormats(t *testing.T) {
	var slc, f16, txt bytes.Buffer
	sinks := []*TargetSink{
		NewTargetSink(&slc, TargetOptions{Format: FormatSLCAN, Sources: []uint16{0}}),
		NewTargetSink(&f16, TargetOptions{Format: FormatFrame16, Sources: []uint16{0}}),
		NewTargetSink(&txt, TargetOptions{Format: FormatText, Sources: []uint16{1}}),
	}
	sent := simulate(t, 10*time.Second, sinks[0], sinks[1], sinks[2])
	var frames []can.Frame
	var lines []string
	for _, m := range sent {
		switch m.Kind {
		case bus.KindCAN:
			frames = append(frames, m.Frame)
		case bus.KindLine:
			lines = append(lines, m.Text)
		}
	}
	var dec bus.SLCANDecoder
	var got []can.Frame
	dec.Feed(slc.Bytes(), func(f can.Frame, _ uint16, _ bool) { got = append(got, f) })
	if !equalFrames(got, frames) {
		t.Errorf("slcan: %d frames back of %d", len(got), len(frames))
	}
	got = got[:0]
	b := f16.Bytes()
	for len(b) >= bus.FrameSize {
		f, kind, err := bus.ParseFrame16(b[:bus.FrameSize], binary.LittleEndian)
		if err != nil || kind != bus.KindCAN {
			t.Fatalf("frame16: %v %v", kind, err)
		}
		got = append(got, f)
		b = b[bus.FrameSize:]
	}
	if len(b) != 0 || !equalFrames(got, frames) {
		t.Errorf("frame16: %d frames back of %d, %d bytes left", len(got), len(frames), len(b))
	}
	sc := bus.NewLineScanner(&txt)
	var gotLines []string
	for sc.Scan() {
		gotLines = append(gotLines, sc.Text())
	}
	if fmt.Sprint(gotLines) != fmt.Sprint(lines) || len(lines) < 100 {
		t.Errorf("text: %d lines back of %d", len(gotLines), len(lines))
	}
}

// Garbage on a serial-line CAN target reaches the wire as bytes the slcan
// decoder counts as bad, while the frames around it still arrive.
func TestTargetSLCANGarbage(t *testing.T) {
	var slc bytes.Buffer
	ts := NewTargetSink(&slc, TargetOptions{Format: FormatSLCAN, Sources: []uint16{0}})
	s, _ := newBuoySim(t, Options{Speed: SpeedMax, For: 30 * time.Second, Faults: []Fault{{Kind: FaultGarbage}}})
	if err := s.Run(context.Background(), ts); err != nil {
		t.Fatal(err)
	}
	var dec bus.SLCANDecoder
	n := 0
	dec.Feed(slc.Bytes(), func(can.Frame, uint16, bool) { n++ })
	if st := dec.Stats(); st.Bad < 25 || n < 900 {
		t.Errorf("%d bad lines, %d frames; want 30 bad and about 1000 frames", st.Bad, n)
	}
}

func equalFrames(a, b []can.Frame) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// Rate mode paces on an injected clock: N messages per second of wall time,
// data time restamped k/N, stopping after For.
func TestTargetRate(t *testing.T) {
	now := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	var slept time.Duration
	stopped := 0
	var buf bytes.Buffer
	ts := NewTargetSink(&buf, TargetOptions{
		Format: FormatCapture, Names: []string{"bms", "console"}, Sources: []uint16{0},
		Start: t0.UnixNano(), Rate: 8000, For: 2 * time.Second,
		Stop:  func() { stopped++ },
		Now:   func() time.Time { return now },
		Sleep: func(_ context.Context, d time.Duration) error { now = now.Add(d); slept += d; return nil },
	})
	s, _ := newBuoySim(t, Options{Speed: SpeedMax, For: 10 * time.Minute, Seed: 5})
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	ts.opt.Stop = func() { stopped++; cancel() }
	if err := s.Run(ctx, ts); err != nil {
		t.Fatal(err)
	}
	if ts.Written() != 16000 {
		t.Errorf("wrote %d frames in 2 s at 8000/s, want 16000", ts.Written())
	}
	if stopped != 1 {
		t.Errorf("Stop called %d times", stopped)
	}
	// the last frame is due at 15999/8000 s; the sink sleeps until it is
	// within 2 ms of that
	if slept < 1990*time.Millisecond || slept > 2*time.Second {
		t.Errorf("slept %v for 2 s of frames", slept)
	}
	if want := t0.UnixNano() + int64(15999*time.Second/8000); ts.LastT() != want {
		t.Errorf("last data time %d, want %d", ts.LastT(), want)
	}
}

type failWriter struct{ n int }

func (f *failWriter) Write(p []byte) (int, error) {
	f.n++
	return 0, fmt.Errorf("device unplugged")
}

// A write error stops the run and is reported, and nothing more is written.
func TestTargetWriteError(t *testing.T) {
	fw := &failWriter{}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	ts := NewTargetSink(fw, TargetOptions{Format: FormatSLCAN, Stop: cancel})
	s, _ := newBuoySim(t, Options{Speed: SpeedMax, For: time.Hour})
	if err := s.Run(ctx, ts); err != nil {
		t.Fatal(err)
	}
	if ts.Err() == nil || fw.n != 1 {
		t.Errorf("err %v after %d writes", ts.Err(), fw.n)
	}
	if s.State().Elapsed >= time.Hour {
		t.Error("the run went on after the write error")
	}
}

// The simulator drives the real tcp-can source through a Broadcaster: the
// path of a load test from a separate process.
func TestBroadcasterToTCPSource(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	bc := NewBroadcaster(ln, 0)
	defer bc.Close()
	src, err := bus.Open(bus.Spec{Name: "bms", Kind: bus.KindTCPCAN, Device: ln.Addr().String()})
	if err != nil {
		t.Fatal(err)
	}
	dm := loadMap(t, buoyProfile)
	sink := newDecodeSink(dm)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx, sink) }()
	defer func() {
		cancel()
		if err := <-done; err != nil {
			t.Error(err)
		}
	}()
	if err := bc.WaitClient(ctx); err != nil {
		t.Fatal(err)
	}
	ts := NewTargetSink(bc, TargetOptions{Format: FormatFrame16, Sources: []uint16{0}})
	sent := simulate(t, 30*time.Second, ts)
	frames := 0
	for _, m := range sent {
		if m.Kind == bus.KindCAN {
			frames++
		}
	}
	waitFor(t, func() bool {
		sink.mu.Lock()
		defer sink.mu.Unlock()
		return sink.v.Src[0].Messages >= uint64(frames)
	})
	if v, fl := sink.value(t, "cell[7].voltage"); fl != decode.FlagOK || v < 3.5 || v > 3.7 {
		t.Errorf("cell 7 over tcp-can: %g (%v)", v, fl)
	}
	sink.mu.Lock()
	c := sink.v.Src[0]
	sink.mu.Unlock()
	if c.Messages != uint64(frames) || c.Unknown != 0 || c.DecodeErrors != 0 {
		t.Errorf("tcp-can: %d messages of %d, %d unknown, %d errors", c.Messages, frames, c.Unknown, c.DecodeErrors)
	}
}
