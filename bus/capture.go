package bus

import (
	"bufio"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"

	"go.einride.tech/can"
)

// The capture format is packwatch's own plain-text record of messages, one
// per line; '#' starts a comment:
//
//	# start 2026-05-01T08:00:00Z
//	0.000 bms can 4C0 0020100F100E10
//	0.010 console line cell 3: 3912 mV
//
// SECONDS count from the capture's start, which the optional first line
// "# start RFC3339" fixes in UTC. IDs are 3 hex digits (standard) or 8
// (extended); DATAHEX is 0 to 8 bytes in hex.

// CaptureError is one malformed capture line.
type CaptureError struct {
	Line int
	Text string
	Err  error
}

func (e *CaptureError) Error() string {
	return fmt.Sprintf("capture line %d: %v: %q", e.Line, e.Err, truncate(e.Text, 80))
}

func (e *CaptureError) Unwrap() error { return e.Err }

// ErrUnknownSource is wrapped by a CaptureError whose source name the caller
// does not know.
var ErrUnknownSource = errors.New("unknown source")

// CaptureReader reads a capture scanner-style:
//
//	r := bus.NewCaptureReader(f, resolve)
//	for r.Scan() { m := r.Message() … }
//	if err := r.Err(); err != nil { … }
//
// Malformed lines are skipped and handed to OnError (if set), and counted.
type CaptureReader struct {
	sc      *bufio.Scanner
	resolve func(name string) (int, bool)
	line    int
	msg     Message
	err     error
	start   int64
	started bool
	// OnError, if set, receives every malformed line.
	OnError func(*CaptureError)
	// Malformed counts skipped lines.
	Malformed int
}

// NewCaptureReader reads a capture from r; resolve maps a source name to the
// index that goes into Message.Src.
func NewCaptureReader(r io.Reader, resolve func(name string) (int, bool)) *CaptureReader {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 64*1024), 1024*1024)
	return &CaptureReader{sc: sc, resolve: resolve}
}

// Start is the capture's start time in ns since the epoch (0 when the
// capture has no "# start" line).
func (c *CaptureReader) Start() int64 { return c.start }

// Message is the message read by the last successful Scan.
func (c *CaptureReader) Message() Message { return c.msg }

// Err is the first I/O error, if any (malformed lines are not errors).
func (c *CaptureReader) Err() error { return c.err }

// Scan reads the next message, skipping comments, blank and malformed lines.
func (c *CaptureReader) Scan() bool {
	for c.sc.Scan() {
		c.line++
		text := strings.TrimRight(c.sc.Text(), "\r")
		trimmed := strings.TrimSpace(text)
		if trimmed == "" {
			continue
		}
		if trimmed[0] == '#' {
			if rest, ok := strings.CutPrefix(trimmed, "# start "); ok && !c.started {
				t, err := time.Parse(time.RFC3339Nano, strings.TrimSpace(rest))
				if err != nil {
					c.bad(text, fmt.Errorf("start time: %w", err))
					continue
				}
				c.start = t.UnixNano()
			}
			continue
		}
		c.started = true
		m, err := ParseCaptureLine(text, c.start, c.resolve)
		if err != nil {
			c.bad(text, err)
			continue
		}
		c.msg = m
		return true
	}
	c.err = c.sc.Err()
	return false
}

func (c *CaptureReader) bad(text string, err error) {
	c.Malformed++
	if c.OnError != nil {
		c.OnError(&CaptureError{Line: c.line, Text: text, Err: err})
	}
}

// ParseCaptureLine parses one message line of a capture (not a comment).
func ParseCaptureLine(text string, start int64, resolve func(string) (int, bool)) (Message, error) {
	var m Message
	secStr, rest, ok := cutField(text)
	if !ok {
		return m, errors.New("want SECONDS SOURCE can|line …")
	}
	sec, err := strconv.ParseFloat(secStr, 64)
	if err != nil || math.IsNaN(sec) || math.IsInf(sec, 0) || sec < 0 || sec > 1e9 {
		return m, fmt.Errorf("time %q is not a number of seconds", secStr)
	}
	srcName, rest, ok := cutField(rest)
	if !ok {
		return m, errors.New("missing source and kind")
	}
	idx, known := resolve(srcName)
	if !known || idx < 0 || idx > math.MaxUint16 {
		return m, fmt.Errorf("%w %q", ErrUnknownSource, srcName)
	}
	kind, rest, _ := cutField(rest)
	m.T = start + int64(math.Round(sec*1e9))
	m.Src = uint16(idx)
	switch kind {
	case "can":
		idStr, rest, ok := cutField(rest)
		if !ok && idStr == "" {
			return m, errors.New("missing CAN ID")
		}
		f, err := parseCaptureFrame(idStr, strings.TrimSpace(rest))
		if err != nil {
			return m, err
		}
		m.Kind, m.Frame = KindCAN, f
	case "line":
		// the text is everything after "line " as written
		m.Kind, m.Text = KindLine, rest
	case "gap":
		m.Kind, m.Text = KindGap, strings.TrimSpace(rest)
	default:
		return m, fmt.Errorf("kind %q: want can or line", kind)
	}
	return m, nil
}

func parseCaptureFrame(idStr, dataStr string) (can.Frame, error) {
	var f can.Frame
	switch len(idStr) {
	case 3:
	case 8:
		f.IsExtended = true
	default:
		return f, fmt.Errorf("CAN ID %q: want 3 hex digits (standard) or 8 (extended)", idStr)
	}
	id, err := strconv.ParseUint(idStr, 16, 32)
	if err != nil {
		return f, fmt.Errorf("CAN ID %q is not hex", idStr)
	}
	if (!f.IsExtended && id > 0x7FF) || id > 0x1FFFFFFF {
		return f, fmt.Errorf("CAN ID %q is out of range", idStr)
	}
	f.ID = uint32(id)
	if strings.ContainsAny(dataStr, " \t") {
		return f, fmt.Errorf("data %q: write the bytes as one hex string", dataStr)
	}
	if len(dataStr)%2 != 0 || len(dataStr) > 16 {
		return f, fmt.Errorf("data %q: want 0 to 8 bytes as hex pairs", dataStr)
	}
	n, err := hex.Decode(f.Data[:], []byte(dataStr))
	if err != nil {
		return f, fmt.Errorf("data %q is not hex", dataStr)
	}
	f.Length = uint8(n)
	return f, nil
}

// AppendCapture appends one message as a capture line (with newline). start
// is the capture's start in ns; name is the message's source name. Kinds the
// format has no line for (error frames) append nothing.
func AppendCapture(dst []byte, m *Message, start int64, name string) []byte {
	n := len(dst)
	dst = strconv.AppendFloat(dst, float64(m.T-start)/1e9, 'f', 6, 64)
	dst = append(dst, ' ')
	dst = append(dst, name...)
	switch m.Kind {
	case KindCAN:
		dst = append(dst, " can "...)
		if m.Frame.IsExtended {
			dst = fmt.Appendf(dst, "%08X", m.Frame.ID)
		} else {
			dst = fmt.Appendf(dst, "%03X", m.Frame.ID)
		}
		dst = append(dst, ' ')
		dst = fmt.Appendf(dst, "%X", m.Frame.Data[:m.Frame.Length])
	case KindLine:
		dst = append(dst, " line "...)
		dst = append(dst, m.Text...)
	case KindGap:
		dst = append(dst, " gap "...)
		dst = append(dst, m.Text...)
	default:
		return dst[:n] // nothing to write for other kinds
	}
	return append(dst, '\n')
}

// cutField splits off the first space-separated field.
func cutField(s string) (field, rest string, ok bool) {
	s = strings.TrimLeft(s, " \t")
	i := strings.IndexAny(s, " \t")
	if i < 0 {
		return s, "", false
	}
	return s[:i], s[i+1:], true
}

func truncate(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return s[:n] + "…"
}
