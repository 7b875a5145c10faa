//go:build unix

package bus_test

import (
	"context"
	"errors"
	"math/rand/v2"
	"os"
	"strings"
	"sync"
	"testing"
	"time"

	"packwatch/bus"
	"packwatch/bus/bustest"
)

// runSource starts src and returns its recorder; the source is stopped and
// Run's nil return checked at cleanup.
func runSource(t *testing.T, src bus.Source) *bustest.Recorder {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	rec := bustest.NewRecorder()
	done := make(chan error, 1)
	go func() { done <- src.Run(ctx, rec) }()
	t.Cleanup(func() {
		cancel()
		if err := <-done; err != nil {
			t.Errorf("Run: %v", err)
		}
	})
	return rec
}

func hasReason(sub string) func([]bustest.Event) bool {
	return func(ev []bustest.Event) bool {
		for _, e := range ev {
			if !e.IsMsg && strings.Contains(e.Status.Reason, sub) {
				return true
			}
		}
		return false
	}
}

// The open sequence (C, S<n>, L) goes out on every connect and C on exit,
// as the kernel's slcan driver and common adapters expect (REFERENCES.md,
// drivers/net/can/slcan/slcan-core.c).
func TestSerialCANOpenSequenceOnReconnect(t *testing.T) {
	for _, tc := range []struct {
		normal bool
		seq    string
	}{{false, "C\rS5\rL\r"}, {true, "C\rS5\rO\r"}} {
		p := newPtyDev(t)
		spec := testSpec(bus.KindSerialCAN, p.link)
		spec.Bitrate, spec.Normal = 250000, tc.normal
		src, err := bus.Open(spec)
		if err != nil {
			t.Fatal(err)
		}
		ctx, cancel := context.WithCancel(context.Background())
		rec := bustest.NewRecorder()
		done := make(chan error, 1)
		go func() { done <- src.Run(ctx, rec) }()
		d := slcanDriver{ptyDev: p, openSeq: tc.seq}
		rec.WaitStatus(t, bus.StateConnected, 1)
		d.Send(t, 0, 5)
		// Unplugging drops bytes still in flight, so wait for them first.
		rec.WaitFor(t, "5 frames", func(ev []bustest.Event) bool { return len(dataSeqsOf(d, ev)) == 5 })
		p.Unplug(t)
		rec.WaitStatus(t, bus.StateDisconnected, 1)
		p.Replug(t)
		rec.WaitStatus(t, bus.StateConnected, 2)
		d.Send(t, 5, 5) // waits for the open sequence on the new pty
		rec.WaitFor(t, "10 frames", func(ev []bustest.Event) bool { return len(dataSeqsOf(d, ev)) == 10 })
		cancel()
		if err := <-done; err != nil {
			t.Fatal(err)
		}
		waitUntil(t, "the close command", func() bool { return p.written() == tc.seq+"C\r" })
		if sts := rec.Statuses(); !strings.Contains(sts[len(sts)-1].Reason, "stopped; 10 messages, 220 bytes") {
			t.Errorf("last status %q", sts[len(sts)-1].Reason)
		}
		if p.opens != 2 {
			t.Fatalf("%d ptys", p.opens)
		}
		p.Close()
	}
}

// fakePorts is a serial port listing the test controls.
type fakePorts struct {
	mu    sync.Mutex
	ports []bus.PortInfo
}

func (f *fakePorts) set(p ...bus.PortInfo) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.ports = p
}

func (f *fakePorts) list() ([]bus.PortInfo, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	return append([]bus.PortInfo(nil), f.ports...), nil
}

// A device that returns under another name (ttyUSB0 as ttyUSB1) is found
// again by its USB identity: named usb:VID:PID:SERIAL in the profile, or
// learnt from the port list when the profile names the path.
func TestSerialFollowsRenamedDevice(t *testing.T) {
	usb := func(name string) bus.PortInfo {
		return bus.PortInfo{Name: name, USB: true, VID: "ABCD", PID: "1234", Serial: "BENCH1", Product: "test adapter"}
	}
	for _, byPath := range []bool{false, true} {
		t.Run(map[bool]string{false: "usb-name", true: "path"}[byPath], func(t *testing.T) { followRenamed(t, byPath, usb) })
	}
}

func followRenamed(t *testing.T, byPath bool, usb func(string) bus.PortInfo) {
	first, second := newPtyDev(t), newPtyDev(t)
	if first.slaveName() == second.slaveName() {
		t.Fatal("ptys share a name")
	}
	ports := &fakePorts{}
	ports.set(usb(first.slaveName()))
	dev := "usb:abcd:1234:BENCH1"
	if byPath {
		dev = first.slaveName()
	}
	spec := testSpec(bus.KindSerialText, dev)
	spec.Ports = ports.list
	rec := runSource(t, mustOpen(t, spec))
	rec.WaitStatus(t, bus.StateConnected, 1)
	textDriver{first}.Send(t, 0, 3)
	rec.WaitFor(t, "3 lines", func(ev []bustest.Event) bool { return len(dataSeqsOf(textDriver{first}, ev)) == 3 })
	first.Close()
	rec.WaitStatus(t, bus.StateDisconnected, 1)
	ports.set(usb(second.slaveName()))
	rec.WaitStatus(t, bus.StateConnected, 2)
	textDriver{second}.Send(t, 3, 3)
	rec.WaitFor(t, "6 lines", func(ev []bustest.Event) bool { return len(dataSeqsOf(textDriver{second}, ev)) == 6 })
	sts := rec.Statuses()
	last := ""
	for _, s := range sts {
		if s.State == bus.StateConnected {
			last = s.Reason
		}
	}
	if !strings.Contains(last, second.slaveName()) {
		t.Errorf("byPath=%v: connected to %q, want %s", byPath, last, second.slaveName())
	}
	second.Close()
}

func dataSeqsOf(d bustest.Driver, ev []bustest.Event) []int {
	var out []int
	for _, e := range ev {
		if e.IsMsg {
			if s, ok := d.Seq(e.Msg); ok {
				out = append(out, s)
			}
		}
	}
	return out
}

// A pty ignores the baud rate, so a wrong baud rate is simulated by what it
// produces: random bytes. The source says so in words, and never fails.
func TestSerialWrongBaudHint(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	garbage := make([]byte, 4096)
	for i := range garbage {
		garbage[i] = byte(rng.UintN(256))
	}
	for _, kind := range []string{bus.KindSerialText, bus.KindSerialCAN} {
		t.Run(kind, func(t *testing.T) { wrongBaud(t, kind, garbage) })
	}
}

func wrongBaud(t *testing.T, kind string, garbage []byte) {
	p := newPtyDev(t)
	spec := testSpec(kind, p.link)
	spec.Quiet = 300 * time.Millisecond
	src := mustOpen(t, spec)
	rec := runSource(t, src)
	rec.WaitStatus(t, bus.StateConnected, 1)
	if kind == bus.KindSerialCAN {
		waitUntil(t, "open sequence", func() bool { return strings.Contains(p.written(), "L\r") })
	}
	p.write(t, garbage)
	rec.WaitFor(t, kind+": unreadable input hint", hasReason("unreadable input: check baud rate"))
	st := src.(interface{ Stats() bus.Stats }).Stats()
	if st.Bytes != uint64(len(garbage)) || st.Bad == 0 {
		t.Errorf("%s: stats %+v", kind, st)
	}
	t.Cleanup(p.Close)
}

// An adapter that answers the open sequence with BEL (it refuses a command,
// for instance listen-only mode) is reported in words.
func TestSerialCANRefusedHint(t *testing.T) {
	p := newPtyDev(t)
	defer p.Close()
	spec := testSpec(bus.KindSerialCAN, p.link)
	spec.Quiet = 300 * time.Millisecond
	rec := runSource(t, mustOpen(t, spec))
	waitUntil(t, "open sequence", func() bool { return strings.Contains(p.written(), "C\rL\r") })
	p.write(t, []byte("\r\a"))
	rec.WaitFor(t, "refusal hint", hasReason("refuses commands and sends no frames (1 BEL"))
}

func TestSerialNoBytesHint(t *testing.T) {
	p := newPtyDev(t)
	defer p.Close()
	spec := testSpec(bus.KindSerialText, p.link)
	spec.Quiet = 50 * time.Millisecond
	rec := runSource(t, mustOpen(t, spec))
	rec.WaitFor(t, "no bytes hint", hasReason("nothing received"))
}

func TestSerialMissingDevice(t *testing.T) {
	spec := testSpec(bus.KindSerialText, t.TempDir()+"/ttyNONE")
	var mu sync.Mutex
	var waits []time.Duration
	spec.RetryMin, spec.RetryMax = 250*time.Millisecond, 2*time.Second
	spec.Sleep = func(ctx context.Context, d time.Duration) error {
		mu.Lock()
		waits = append(waits, d)
		mu.Unlock()
		return ctx.Err()
	}
	rec := runSource(t, mustOpen(t, spec))
	rec.WaitFor(t, "a disconnected status naming the device", hasReason("ttyNONE"))
	waitUntilT := func() bool { mu.Lock(); defer mu.Unlock(); return len(waits) >= 6 }
	waitUntil(t, "6 retries", waitUntilT)
	mu.Lock()
	got := append([]time.Duration(nil), waits[:6]...)
	mu.Unlock()
	// Backoff: 250 ms doubling up to 2 s.
	want := []time.Duration{250 * time.Millisecond, 500 * time.Millisecond, time.Second, 2 * time.Second, 2 * time.Second, 2 * time.Second}
	for i := range want {
		if got[i] != want[i] {
			t.Fatalf("backoff %v, want %v", got, want)
		}
	}
	if n := bustest.CountStatus(rec.Events(), bus.StateDisconnected); n != 1 {
		t.Errorf("%d disconnected statuses for the same reason, want 1", n)
	}
}

func TestOpenErrors(t *testing.T) {
	for _, tc := range []struct {
		spec bus.Spec
		want string
	}{
		{bus.Spec{Kind: "serial-can"}, "no device"},
		{bus.Spec{Kind: "", Device: "x"}, "no kind"},
		{bus.Spec{Kind: "can-over-carrier-pigeon", Device: "x"}, "unknown kind"},
		{bus.Spec{Kind: "serial-text", Device: "/dev/x", Parity: "sideways"}, "parity"},
		{bus.Spec{Kind: "serial-text", Device: "/dev/x", StopBits: "3"}, "stop bits"},
		{bus.Spec{Kind: "serial-text", Device: "/dev/x", DataBits: 9}, "data bits"},
		{bus.Spec{Kind: "serial-can", Device: "/dev/x", Bitrate: 33333}, "bitrate"},
		{bus.Spec{Kind: "serial-can", Device: "usb:12:34"}, "4 hex digits"},
		{bus.Spec{Kind: "serial-text", Device: "usb:ABCD"}, "usb:VID:PID"},
		{bus.Spec{Kind: "tcp-can", Device: "gateway"}, "host:port"},
	} {
		_, err := bus.Open(tc.spec)
		if err == nil || !errors.Is(err, bus.ErrSpec) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("Open(%+v) = %v, want an ErrSpec containing %q", tc.spec, err, tc.want)
		}
	}
	for _, spec := range []bus.Spec{
		{Kind: "serial-can", Device: "usb:abcd:1234:X", Bitrate: 500000, Normal: true},
		{Kind: "serial-text", Device: "COM7", Parity: "even", StopBits: "2", DataBits: 7, Baud: 9600},
		{Kind: "tcp-can", Device: "127.0.0.1:2000"},
	} {
		if _, err := bus.Open(spec); err != nil {
			t.Errorf("Open(%+v): %v", spec, err)
		}
	}
}

// Some drivers keep a vanished port timing out instead of failing; a quiet
// port whose device node (here the profile's symlink, as a udev rule makes)
// disappears is treated as unplugged within a few seconds.
func TestSerialQuietPortGone(t *testing.T) {
	p := newPtyDev(t)
	defer p.Close()
	rec := runSource(t, mustOpen(t, testSpec(bus.KindSerialText, p.link)))
	rec.WaitStatus(t, bus.StateConnected, 1)
	if err := os.Remove(p.link); err != nil {
		t.Fatal(err)
	}
	rec.WaitFor(t, "disconnected: gone", hasReason("is gone"))
}
