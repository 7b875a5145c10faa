package bus

import (
	"io"
	"unicode/utf8"
)

// MaxLine is the longest text line kept whole; a longer line is cut to its
// first MaxLine bytes and counted in LineStats.Cut.
const MaxLine = 4096

// LineStats counts what a LineSplitter has seen.
type LineStats struct {
	Lines   uint64 // lines emitted
	Invalid uint64 // bytes of invalid UTF-8, each replaced by U+FFFD
	Control uint64 // control characters other than tab, each replaced by U+FFFD
	Escapes uint64 // terminal escape sequences (ESC [ ... final byte) removed
	Cut     uint64 // lines over MaxLine bytes, cut
}

// Bad returns the number of bytes that were not clean text.
func (s LineStats) Bad() uint64 { return s.Invalid + s.Control }

// LineSplitter cuts a byte stream from a text console into lines. A line ends
// at LF, CR, CR LF or form feed; empty lines are dropped. Invalid UTF-8 and
// control characters are replaced by U+FFFD and counted, terminal colour
// sequences are removed, lines over MaxLine bytes are cut and counted; none
// of it is an error. It keeps a partial line between calls, so reads may
// split a line (or a CR LF pair) anywhere. The zero value is ready.
type LineSplitter struct {
	buf     []byte
	afterCR bool // the last byte was CR: an LF right after it ends nothing
	cutting bool // the current line was cut: drop bytes until its end
	stats   LineStats
}

func isLineEnd(c byte) bool { return c == '\n' || c == '\r' || c == '\f' }

// Feed splits p and calls line for each complete line, in order.
func (s *LineSplitter) Feed(p []byte, line func(string)) {
	for len(p) > 0 {
		if s.afterCR {
			s.afterCR = false
			if p[0] == '\n' {
				p = p[1:]
				continue
			}
		}
		i := 0
		for i < len(p) && !isLineEnd(p[i]) {
			i++
		}
		if !s.cutting {
			room := MaxLine - len(s.buf)
			if i > room {
				s.buf = append(s.buf, p[:room]...)
				s.emit(line)
				s.stats.Cut++
				s.cutting = true
			} else {
				s.buf = append(s.buf, p[:i]...)
			}
		}
		if i == len(p) {
			return
		}
		s.afterCR = p[i] == '\r'
		if !s.cutting {
			s.emit(line)
		}
		s.cutting = false
		p = p[i+1:]
	}
}

// Flush emits a final line that had no line ending (at end of input).
func (s *LineSplitter) Flush(line func(string)) {
	if !s.cutting {
		s.emit(line)
	}
	s.cutting, s.afterCR = false, false
}

// Reset drops any partial line (after a reconnect). Counters are kept.
func (s *LineSplitter) Reset() {
	s.buf = s.buf[:0]
	s.cutting, s.afterCR = false, false
}

// Stats returns the counters so far.
func (s *LineSplitter) Stats() LineStats { return s.stats }

func (s *LineSplitter) emit(line func(string)) {
	b := s.buf
	s.buf = s.buf[:0]
	if len(b) == 0 {
		return
	}
	clean := true
	for _, c := range b {
		if c < 0x20 && c != '\t' || c >= 0x7F {
			clean = false
			break
		}
	}
	var text string
	if clean {
		text = string(b)
	} else {
		text = s.sanitize(b)
		if text == "" {
			return
		}
	}
	s.stats.Lines++
	line(text)
}

// sanitize replaces invalid UTF-8 and control characters and removes CSI
// escape sequences (ESC '[' parameters final-byte in 0x40..0x7E).
func (s *LineSplitter) sanitize(b []byte) string {
	out := make([]byte, 0, len(b)+8)
	for i := 0; i < len(b); {
		c := b[i]
		if c == 0x1B && i+1 < len(b) && b[i+1] == '[' {
			j := i + 2
			for j < len(b) && (b[j] < 0x40 || b[j] > 0x7E) {
				j++
			}
			if j < len(b) {
				s.stats.Escapes++
				i = j + 1
				continue
			}
		}
		if c < 0x80 {
			if c < 0x20 && c != '\t' || c == 0x7F {
				s.stats.Control++
				out = utf8.AppendRune(out, utf8.RuneError)
			} else {
				out = append(out, c)
			}
			i++
			continue
		}
		r, n := utf8.DecodeRune(b[i:])
		switch {
		case r == utf8.RuneError && n <= 1:
			s.stats.Invalid++
			out = utf8.AppendRune(out, utf8.RuneError)
			n = 1
		case r >= 0x80 && r <= 0x9F: // C1 controls
			s.stats.Control++
			out = utf8.AppendRune(out, utf8.RuneError)
		default:
			out = append(out, b[i:i+n]...)
		}
		i += n
	}
	return string(out)
}

// LineScanner reads lines from an io.Reader with a LineSplitter, in the
// manner of bufio.Scanner: call Scan until it returns false, then Err.
type LineScanner struct {
	r     io.Reader
	sp    LineSplitter
	buf   []byte
	queue []string
	text  string
	err   error
	done  bool
}

// NewLineScanner returns a scanner reading r in blocks of 4 KiB.
func NewLineScanner(r io.Reader) *LineScanner {
	return &LineScanner{r: r, buf: make([]byte, 4096)}
}

// Scan advances to the next line, which Text returns. It returns false at
// the end of input or on a read error.
func (sc *LineScanner) Scan() bool {
	push := func(l string) { sc.queue = append(sc.queue, l) }
	for len(sc.queue) == 0 {
		if sc.done {
			return false
		}
		n, err := sc.r.Read(sc.buf)
		sc.sp.Feed(sc.buf[:n], push)
		if err != nil {
			sc.done = true
			sc.sp.Flush(push)
			if err != io.EOF {
				sc.err = err
			}
		}
	}
	sc.text = sc.queue[0]
	sc.queue = sc.queue[1:]
	return true
}

// Text returns the line found by the last Scan, without its line ending.
func (sc *LineScanner) Text() string { return sc.text }

// Err returns the first read error other than io.EOF.
func (sc *LineScanner) Err() error { return sc.err }

// Stats returns the splitter's counters.
func (sc *LineScanner) Stats() LineStats { return sc.sp.Stats() }
