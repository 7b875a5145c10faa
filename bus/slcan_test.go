package bus

import (
	"bytes"
	"errors"
	"io"
	"testing"
	"testing/iotest"

	"go.einride.tech/can"
)

// Line formats from Linux drivers/net/can/slcan/slcan-core.c (slc_bump /
// slcan_bump_frame for parsing, slc_encaps / slcan_encaps for encoding), as
// summarised in REFERENCES.md: <type><id><dlc><data>[timestamp] CR, t/r with 3
// ID digits, T/R with 8, DLC one digit 0-8, remote frames carry no data.
func TestParseSLCAN(t *testing.T) {
	for _, tc := range []struct {
		line  string
		want  can.Frame
		ts    uint16
		hasTS bool
		err   error
	}{
		// REFERENCES.md examples.
		{line: "t4563112233", want: can.Frame{ID: 0x456, Length: 3, Data: can.Data{0x11, 0x22, 0x33}}},
		{line: "T12ABCDEF2AA55", want: can.Frame{ID: 0x12ABCDEF, IsExtended: true, Length: 2, Data: can.Data{0xAA, 0x55}}},
		{line: "r1230", want: can.Frame{ID: 0x123, IsRemote: true}},
		// The kernel parses hex with kstrtou32/hex_to_bin: lower case too.
		{line: "t7ff80102030405060708", want: can.Frame{ID: 0x7FF, Length: 8, Data: can.Data{1, 2, 3, 4, 5, 6, 7, 8}}},
		{line: "T1fffffff1ab", want: can.Frame{ID: 0x1FFFFFFF, IsExtended: true, Length: 1, Data: can.Data{0xAB}}},
		// Remote frame with DLC > 0: no data bytes follow.
		{line: "R12ABCDEF8", want: can.Frame{ID: 0x12ABCDEF, IsExtended: true, IsRemote: true, Length: 8}},
		{line: "t0000", want: can.Frame{}},
		// Adapter timestamp: 4 hex digits after the data.
		{line: "t45631122331F40", want: can.Frame{ID: 0x456, Length: 3, Data: can.Data{0x11, 0x22, 0x33}}, ts: 0x1F40, hasTS: true},
		{line: "r1230EA5F", want: can.Frame{ID: 0x123, IsRemote: true}, ts: 0xEA5F, hasTS: true},
		// Errors.
		{line: "", err: ErrSLCANType},
		{line: "x4563112233", err: ErrSLCANType},
		{line: "t45", err: ErrSLCANSyntax},
		{line: "t4G63112233", err: ErrSLCANSyntax},
		{line: "t800", err: ErrSLCANSyntax},             // standard ID above 0x7FF
		{line: "T200000000", err: ErrSLCANSyntax},       // extended ID above 0x1FFFFFFF
		{line: "t4569", err: ErrSLCANSyntax},            // DLC 9
		{line: "t456311223", err: ErrSLCANSyntax},       // one data digit short
		{line: "t45631122zz", err: ErrSLCANSyntax},      // bad data digit
		{line: "t4563112233F", err: ErrSLCANSyntax},     // 1 trailing digit
		{line: "t456311223312345", err: ErrSLCANSyntax}, // 5 trailing digits
		{line: "t45631122331G40", err: ErrSLCANSyntax},  // bad timestamp digit
		{line: "r1230112233", err: ErrSLCANSyntax},      // remote frame with data
	} {
		f, ts, hasTS, err := ParseSLCAN([]byte(tc.line))
		if tc.err != nil {
			if !errors.Is(err, tc.err) {
				t.Errorf("ParseSLCAN(%q) err = %v, want %v", tc.line, err, tc.err)
			}
			continue
		}
		if err != nil {
			t.Errorf("ParseSLCAN(%q): %v", tc.line, err)
			continue
		}
		if f != tc.want || ts != tc.ts || hasTS != tc.hasTS {
			t.Errorf("ParseSLCAN(%q) = %+v ts %#x/%v, want %+v ts %#x/%v", tc.line, f, ts, hasTS, tc.want, tc.ts, tc.hasTS)
		}
	}
}

func TestAppendSLCAN(t *testing.T) {
	for _, tc := range []struct {
		f    can.Frame
		want string
	}{
		{can.Frame{ID: 0x456, Length: 3, Data: can.Data{0x11, 0x22, 0x33}}, "t4563112233\r"},
		{can.Frame{ID: 0x12ABCDEF, IsExtended: true, Length: 2, Data: can.Data{0xAA, 0x55}}, "T12ABCDEF2AA55\r"},
		{can.Frame{ID: 0x123, IsRemote: true}, "r1230\r"},
		{can.Frame{ID: 0x12ABCDEF, IsExtended: true, IsRemote: true, Length: 8}, "R12ABCDEF8\r"},
		{can.Frame{ID: 0x00A, Length: 8, Data: can.Data{0xDE, 0xAD, 0xBE, 0xEF, 0, 1, 0xFE, 0xFF}}, "t00A8DEADBEEF0001FEFF\r"},
	} {
		if got := string(AppendSLCAN(nil, tc.f)); got != tc.want {
			t.Errorf("AppendSLCAN(%+v) = %q, want %q", tc.f, got, tc.want)
		}
		back, _, _, err := ParseSLCAN([]byte(tc.want[:len(tc.want)-1]))
		if err != nil || back != tc.f {
			t.Errorf("round trip %q = %+v, %v; want %+v", tc.want, back, err, tc.f)
		}
	}
}

func TestSLCANOpenSequence(t *testing.T) {
	for _, tc := range []struct {
		bitrate int
		normal  bool
		want    string
		wantErr bool
	}{
		// S0..S8 table of the kernel's slcan driver (REFERENCES.md).
		{10000, false, "C\rS0\rL\r", false},
		{125000, false, "C\rS4\rL\r", false},
		{250000, false, "C\rS5\rL\r", false},
		{500000, true, "C\rS6\rO\r", false},
		{800000, false, "C\rS7\rL\r", false},
		{1000000, false, "C\rS8\rL\r", false},
		{0, false, "C\rL\r", false},
		{33333, false, "", true},
	} {
		got, err := SLCANOpenSequence(tc.bitrate, tc.normal)
		if (err != nil) != tc.wantErr || string(got) != tc.want {
			t.Errorf("SLCANOpenSequence(%d, %v) = %q, %v; want %q", tc.bitrate, tc.normal, got, err, tc.want)
		}
	}
}

// slcanStream is a fixture stream: frames, adapter replies, noise, CR LF.
const slcanStream = "\r" + // OK reply to C
	"\r" + // OK reply to S6
	"\a" + // refusal
	"t4563112233\r" +
	"T12ABCDEF2AA55\r\n" + // CR LF from some adapters: the LF is an empty line
	"r1230\r" +
	"t45631122331F40\r" +
	"xyz\r" + // noise
	"t4563112233t4563112233t4563112233\r" + // over-long (lost terminators)
	"z\r" + // transmit acknowledgement
	"t7FF0\r"

func decodeAll(t *testing.T, r io.Reader) ([]can.Frame, SLCANStats) {
	t.Helper()
	var d SLCANDecoder
	var frames []can.Frame
	buf := make([]byte, 4096)
	for {
		n, err := r.Read(buf)
		d.Feed(buf[:n], func(f can.Frame, _ uint16, _ bool) { frames = append(frames, f) })
		if err == io.EOF {
			return frames, d.Stats()
		}
		if err != nil {
			t.Fatal(err)
		}
	}
}

func TestSLCANDecoderSplitReads(t *testing.T) {
	want, wantStats := decodeAll(t, bytes.NewReader([]byte(slcanStream)))
	if len(want) != 5 {
		t.Fatalf("got %d frames, want 5: %+v", len(want), want)
	}
	if wantStats.Bad != 2 || wantStats.Replies != 3 || wantStats.Refusals != 1 || wantStats.Timestamp != 1 {
		t.Fatalf("stats %+v", wantStats)
	}
	for name, r := range map[string]func() io.Reader{
		"one-byte": func() io.Reader { return iotest.OneByteReader(bytes.NewReader([]byte(slcanStream))) },
		"half":     func() io.Reader { return iotest.HalfReader(bytes.NewReader([]byte(slcanStream))) },
		"data-err": func() io.Reader { return iotest.DataErrReader(bytes.NewReader([]byte(slcanStream))) },
	} {
		got, st := decodeAll(t, r())
		if len(got) != len(want) || st != wantStats {
			t.Errorf("%s: %d frames %+v, want %d %+v", name, len(got), st, len(want), wantStats)
			continue
		}
		for i := range got {
			if got[i] != want[i] {
				t.Errorf("%s: frame %d = %+v, want %+v", name, i, got[i], want[i])
			}
		}
	}
}

func FuzzParseSLCAN(f *testing.F) {
	for _, s := range []string{"t4563112233", "T12ABCDEF2AA55", "r1230", "R12ABCDEF8", "t45631122331F40", "t800", "x", ""} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, line []byte) {
		fr, ts, hasTS, err := ParseSLCAN(line)
		if err != nil {
			return
		}
		// A parsed frame encodes back to a line that parses to the same frame.
		enc := AppendSLCAN(nil, fr)
		back, _, _, err := ParseSLCAN(enc[:len(enc)-1])
		if err != nil || back != fr {
			t.Fatalf("%q -> %+v -> %q -> %+v, %v", line, fr, enc, back, err)
		}
		_, _ = ts, hasTS
		// And the stream decoder finds it too.
		var d SLCANDecoder
		n := 0
		d.Feed(append(append([]byte{}, line...), '\r'), func(can.Frame, uint16, bool) { n++ })
		if n != 1 {
			t.Fatalf("decoder found %d frames in %q", n, line)
		}
	})
}
