package bus

import (
	"io"
	"strings"
	"testing"
	"testing/iotest"
	"unicode/utf8"
)

func scanAll(t *testing.T, r io.Reader) ([]string, LineStats) {
	t.Helper()
	sc := NewLineScanner(r)
	var out []string
	for sc.Scan() {
		out = append(out, sc.Text())
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out, sc.Stats()
}

func TestLineSplitter(t *testing.T) {
	long := strings.Repeat("x", MaxLine+100)
	for _, tc := range []struct {
		name  string
		in    string
		want  []string
		stats LineStats
	}{
		{"lf", "a\nb\n", []string{"a", "b"}, LineStats{Lines: 2}},
		{"crlf", "a\r\nb\r\n", []string{"a", "b"}, LineStats{Lines: 2}},
		{"cr", "a\rb\r", []string{"a", "b"}, LineStats{Lines: 2}},
		{"lfcr gives an empty line, dropped", "a\n\rb", []string{"a", "b"}, LineStats{Lines: 2}},
		{"form feed", "a\fb\n", []string{"a", "b"}, LineStats{Lines: 2}},
		{"empty lines dropped", "\n\n\r\na\n\n", []string{"a"}, LineStats{Lines: 1}},
		{"last line without end", "a\nb", []string{"a", "b"}, LineStats{Lines: 2}},
		{"tab kept", "cell\t1\n", []string{"cell\t1"}, LineStats{Lines: 1}},
		{"utf-8 kept", "T = 25 °C\n", []string{"T = 25 °C"}, LineStats{Lines: 1}},
		{"invalid utf-8", "a\xff\xfeb\n", []string{"a\uFFFD\uFFFDb"}, LineStats{Lines: 1, Invalid: 2}},
		{"truncated utf-8", "\xc2\n", []string{"\uFFFD"}, LineStats{Lines: 1, Invalid: 1}},
		{"control", "a\x00b\x07c\x7f\n", []string{"a\uFFFDb\uFFFDc\uFFFD"}, LineStats{Lines: 1, Control: 3}},
		{"c1 control", "a\u0085b\n", []string{"a\uFFFDb"}, LineStats{Lines: 1, Control: 1}},
		{"colour escapes removed", "\x1b[32mOK\x1b[0m 3.71 V\n", []string{"OK 3.71 V"}, LineStats{Lines: 1, Escapes: 2}},
		{"lone escape", "a\x1bb\n", []string{"a\uFFFDb"}, LineStats{Lines: 1, Control: 1}},
		{"long line cut", long + "\nnext\n", []string{long[:MaxLine], "next"}, LineStats{Lines: 2, Cut: 1}},
		{"exactly max", long[:MaxLine] + "\n", []string{long[:MaxLine]}, LineStats{Lines: 1}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			for rname, r := range map[string]io.Reader{
				"whole":    strings.NewReader(tc.in),
				"one-byte": iotest.OneByteReader(strings.NewReader(tc.in)),
				"half":     iotest.HalfReader(strings.NewReader(tc.in)),
				"data-err": iotest.DataErrReader(strings.NewReader(tc.in)),
			} {
				got, st := scanAll(t, r)
				if strings.Join(got, "|") != strings.Join(tc.want, "|") || len(got) != len(tc.want) {
					t.Errorf("%s: lines %q, want %q", rname, got, tc.want)
				}
				if st != tc.stats {
					t.Errorf("%s: stats %+v, want %+v", rname, st, tc.stats)
				}
			}
		})
	}
}

func TestLineScannerError(t *testing.T) {
	r := io.MultiReader(strings.NewReader("a\nb"), iotest.ErrReader(io.ErrUnexpectedEOF))
	sc := NewLineScanner(r)
	var got []string
	for sc.Scan() {
		got = append(got, sc.Text())
	}
	if len(got) != 2 || sc.Err() != io.ErrUnexpectedEOF {
		t.Fatalf("got %q, err %v", got, sc.Err())
	}
}

func FuzzLineSplitter(f *testing.F) {
	for _, s := range []string{"a\nb\r\nc\rd\fe", "\x1b[1;31mhot\x1b[0m\n", "\xff\xfe\x00\n", "cell 1: 3712 mV\r\n", "\r\n\r\n"} {
		f.Add([]byte(s), uint8(3))
	}
	f.Fuzz(func(t *testing.T, in []byte, cut uint8) {
		var whole []string
		var a LineSplitter
		a.Feed(in, func(l string) { whole = append(whole, l) })
		a.Flush(func(l string) { whole = append(whole, l) })
		// Split the same input at an arbitrary point: same lines.
		k := int(cut) % (len(in) + 1)
		var split []string
		var b LineSplitter
		b.Feed(in[:k], func(l string) { split = append(split, l) })
		b.Feed(in[k:], func(l string) { split = append(split, l) })
		b.Flush(func(l string) { split = append(split, l) })
		if len(whole) != len(split) {
			t.Fatalf("%q split at %d: %d lines vs %d", in, k, len(split), len(whole))
		}
		for i := range whole {
			if whole[i] != split[i] {
				t.Fatalf("%q split at %d: line %d %q vs %q", in, k, i, split[i], whole[i])
			}
			l := whole[i]
			if l == "" || !utf8.ValidString(l) || strings.ContainsAny(l, "\r\n\f\x00") {
				t.Fatalf("bad line %q", l)
			}
		}
		if a.Stats() != b.Stats() {
			t.Fatalf("stats %+v vs %+v", a.Stats(), b.Stats())
		}
	})
}
