package bus

import (
	"strings"
	"testing"
	"time"
)

// Line capacity: 115200 baud 8N1 is 10 bits a character, 11,520 chars/s; an
// 8-byte standard slcan line is 22 characters, so about 523 frames/s
// (REFERENCES.md, slcan throughput).
func TestLineLoad(t *testing.T) {
	spec := Spec{Baud: 115200, DataBits: 8}
	if got := serialCharBits(spec); got != 10 {
		t.Fatalf("8N1 bits = %v", got)
	}
	if got := serialCharBits(Spec{Baud: 9600, DataBits: 7, Parity: "even", StopBits: "2"}); got != 11 {
		t.Fatalf("7E2 bits = %v", got)
	}
	w := window{dur: time.Second, bytes: 523 * slcanLineChars}
	if got := lineLoad(spec, w); got < 0.99 || got > 1.0 {
		t.Fatalf("load of 523 frames/s = %v", got)
	}
}

func TestSerialCANHints(t *testing.T) {
	a := newSerialCANAdapter(Spec{Baud: 115200, DataBits: 8})
	for _, tc := range []struct {
		name    string
		w       window
		want    string
		overrun bool
	}{
		{"quiet bus", window{dur: time.Second, bytes: 22 * 50, good: 50}, "", false},
		// A real UART at capacity: ~520 frames/s.
		{"saturated UART", window{dur: time.Second, bytes: 520 * 22, good: 520}, "serial line saturated", true},
		// A USB virtual port ignores the baud: 8,000 frames/s is fine.
		{"usb port", window{dur: time.Second, bytes: 8000 * 22, good: 8000}, "", false},
		{"garbage", window{dur: time.Second, bytes: 3000, good: 0, bad: 40}, "unreadable input: check baud rate", false},
		{"mostly bad", window{dur: time.Second, bytes: 3000, good: 10, bad: 40}, "unreadable input", false},
	} {
		h := a.hint(tc.w)
		if (tc.want == "") != (h == "") || !strings.Contains(h, tc.want) {
			t.Errorf("%s: hint %q, want %q", tc.name, h, tc.want)
		}
		if a.overran(tc.w) != tc.overrun {
			t.Errorf("%s: overrun %v", tc.name, !tc.overrun)
		}
	}
}

func TestSerialTextHints(t *testing.T) {
	a := newSerialTextAdapter(Spec{Baud: 115200, DataBits: 8})
	for _, tc := range []struct {
		w    window
		want string
	}{
		{window{dur: time.Second, bytes: 2000, good: 80, bad: 0}, ""},
		{window{dur: time.Second, bytes: 2000, good: 80, bad: 150}, ""}, // 7.5 %: a noisy line, not a wrong baud
		{window{dur: time.Second, bytes: 2000, good: 30, bad: 400}, "unreadable input: check baud rate"},
		{window{dur: time.Second, bytes: 2000, good: 0, bad: 0}, "bytes but no lines"},
	} {
		h := a.hint(tc.w)
		if (tc.want == "") != (h == "") || !strings.Contains(h, tc.want) {
			t.Errorf("%+v: hint %q, want %q", tc.w, h, tc.want)
		}
	}
}

// fakeAdapter gives the diagnoser a fixed hint.
type fakeAdapter struct {
	serialTextAdapter
	h string
}

func (f *fakeAdapter) hint(window) string { return f.h }

func TestDiagnoser(t *testing.T) {
	spec := Spec{Quiet: 5 * time.Second}
	const s = int64(time.Second)
	a := &fakeAdapter{}
	d := newDiagnoser(spec, 0, 0, 0)
	steps := []struct {
		now     int64
		n       uint64
		adapter string
		want    string
		changed bool
	}{
		{s / 2, 0, "", "", false}, // inside the first period: nothing yet
		{1 * s, 0, "", "", false}, // 1 s of silence: too early to say
		{5 * s, 0, "", "nothing received in the first 5s", true},
		{6 * s, 0, "", "nothing received in the first 5s", false}, // same words: no new status
		{7 * s, 100, "", "", true},                                // bytes: all well
		{8 * s, 100, "unreadable input", "unreadable input", true},
		{9 * s, 100, "unreadable input (other figures)", "unreadable input", false}, // same condition: no new status
		{10 * s, 100, "", "", true},
		{15 * s, 0, "", "nothing received in the last 5s", true},
	}
	for i, st := range steps {
		a.h = st.adapter
		h, changed := d.check(st.now, st.n, 0, 0, a)
		if !strings.HasPrefix(h, st.want) || (st.want == "") != (h == "") || changed != st.changed {
			t.Errorf("step %d: %q changed=%v, want %q changed=%v", i, h, changed, st.want, st.changed)
		}
	}
}
