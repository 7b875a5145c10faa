package bus

import (
	"os"
	"strings"
	"testing"
	"testing/iotest"
)

func resolveExample(name string) (int, bool) {
	switch name {
	case "bms":
		return 0, true
	case "console":
		return 1, true
	}
	return 0, false
}

func TestCaptureReader(t *testing.T) {
	data, err := os.ReadFile("testdata/example.capture")
	if err != nil {
		t.Fatal(err)
	}
	for _, mode := range []string{"whole", "one byte", "half"} {
		t.Run(mode, func(t *testing.T) {
			var r = strings.NewReader(string(data))
			rd := NewCaptureReader(r, resolveExample)
			switch mode {
			case "one byte":
				rd = NewCaptureReader(iotest.OneByteReader(strings.NewReader(string(data))), resolveExample)
			case "half":
				rd = NewCaptureReader(iotest.HalfReader(strings.NewReader(string(data))), resolveExample)
			}
			var bad []int
			rd.OnError = func(e *CaptureError) { bad = append(bad, e.Line) }
			var msgs []Message
			for rd.Scan() {
				msgs = append(msgs, rd.Message())
			}
			if err := rd.Err(); err != nil {
				t.Fatal(err)
			}
			if len(msgs) != 6 {
				t.Fatalf("got %d messages, want 6", len(msgs))
			}
			if rd.Malformed != 2 || len(bad) != 2 || bad[0] != 9 || bad[1] != 10 {
				t.Errorf("malformed = %d at lines %v, want 2 at 9, 10", rd.Malformed, bad)
			}
			start := int64(1777622400) * 1e9 // 2026-05-01T08:00:00Z
			if rd.Start() != start {
				t.Errorf("start = %d, want %d", rd.Start(), start)
			}
			m := msgs[1]
			if m.T != start+50e6 || m.Frame.ID != 0x4D0 || m.Frame.Length != 8 || m.Frame.Data[1] != 0x38 {
				t.Errorf("frame 2 = %+v", m)
			}
			if l := msgs[3]; l.Kind != KindLine || l.Src != 1 || l.Text != "cell 3: 3912 mV" {
				t.Errorf("line = %+v", l)
			}
			// writing back gives the same lines
			for i, m := range msgs {
				line := string(AppendCapture(nil, &m, start, []string{"bms", "console"}[m.Src]))
				back, err := ParseCaptureLine(strings.TrimSuffix(line, "\n"), start, resolveExample)
				if err != nil || back != m {
					t.Errorf("message %d: %q reads back as %+v (%v)", i, line, back, err)
				}
			}
		})
	}
}

func TestCaptureLineErrors(t *testing.T) {
	cases := []string{
		"x bms can 123 00",
		"1.0 nowhere can 123 00",
		"1.0 bms can 12 00",
		"1.0 bms can 800 00",
		"1.0 bms can 123 0011223344556677889900",
		"1.0 bms can 123 0",
		"1.0 bms frame 123 00",
		"NaN bms can 123 00",
		"-1 bms can 123 00",
	}
	for _, c := range cases {
		if _, err := ParseCaptureLine(c, 0, resolveExample); err == nil {
			t.Errorf("%q: no error", c)
		}
	}
	m, err := ParseCaptureLine("2.5 bms can 12ABCDEF AA55", 0, resolveExample)
	if err != nil || !m.Frame.IsExtended || m.Frame.ID != 0x12ABCDEF || m.Frame.Length != 2 || m.T != 2.5e9 {
		t.Errorf("extended: %+v %v", m, err)
	}
}

func FuzzCaptureLine(f *testing.F) {
	for _, s := range []string{"0.000 bms can 4C0 004C0F500F550F", "0.15 console line cell 3: 3912 mV", "1 bms can 12ABCDEF", "1e3 bms gap unplugged", "x"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		m, err := ParseCaptureLine(s, 0, resolveExample)
		if err != nil {
			return
		}
		if m.Kind == KindCAN && (m.Frame.Length > 8 || m.Frame.ID > 0x1FFFFFFF) {
			t.Fatalf("accepted an impossible frame %+v", m.Frame)
		}
		line := AppendCapture(nil, &m, 0, []string{"bms", "console"}[m.Src])
		if m.Kind == KindCAN {
			back, err := ParseCaptureLine(strings.TrimSuffix(string(line), "\n"), 0, resolveExample)
			if err != nil || back.Frame != m.Frame {
				t.Fatalf("round trip of %q: %q → %+v %v", s, line, back, err)
			}
		}
	})
}

func TestAppendCaptureKeepsPrefix(t *testing.T) {
	prefix := []byte("0.000 bms can 123 00\n")
	got := AppendCapture(append([]byte(nil), prefix...), &Message{Kind: KindError}, 0, "bms")
	if string(got) != string(prefix) {
		t.Errorf("an error frame changed the buffer: %q", got)
	}
}
