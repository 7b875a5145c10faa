package bus

import (
	"go.einride.tech/can"
)

// SLCANStats counts what an SLCANDecoder has seen.
type SLCANStats struct {
	Frames    uint64 // frame lines parsed
	Bad       uint64 // malformed frame lines and over-long lines, skipped
	Replies   uint64 // adapter replies that are not frames (empty OK, z/Z, V..., F...)
	Refusals  uint64 // BEL: the adapter refused a command
	Timestamp uint64 // frames that carried an adapter timestamp
}

// SLCANDecoder cuts a byte stream from a serial-line CAN adapter into lines
// (ended by CR, LF or BEL) and parses the frame lines. It keeps a partial line
// between calls, so reads may split a line anywhere. The zero value is ready.
type SLCANDecoder struct {
	line  [slcanMaxLine]byte
	n     int
	long  bool // the current line is over slcanMaxLine: skip to its end
	stats SLCANStats
}

// Feed parses p and calls frame for each complete frame line, in order.
func (d *SLCANDecoder) Feed(p []byte, frame func(f can.Frame, ts uint16, hasTS bool)) {
	for _, c := range p {
		if c != '\r' && c != '\n' && c != '\a' {
			if d.n < len(d.line) {
				d.line[d.n] = c
				d.n++
			} else {
				d.long = true
			}
			continue
		}
		switch {
		case d.long:
			d.stats.Bad++
		case d.n > 0:
			d.parse(frame)
		case c == '\r':
			d.stats.Replies++ // a bare CR: the adapter's OK
		}
		if c == '\a' {
			d.stats.Refusals++
		}
		d.n, d.long = 0, false
	}
}

func (d *SLCANDecoder) parse(frame func(f can.Frame, ts uint16, hasTS bool)) {
	l := d.line[:d.n]
	switch l[0] {
	case 't', 'T', 'r', 'R':
	case 'z', 'Z', 'V', 'v', 'N', 'F', 's', 'e':
		// Replies to transmit, version, serial number and status commands,
		// and the state (s) and error (e) lines that newer kernels' slcan
		// driver accepts from adapters (from memory: not decoded, counted).
		d.stats.Replies++
		return
	default:
		d.stats.Bad++
		return
	}
	f, ts, hasTS, err := ParseSLCAN(l)
	if err != nil {
		d.stats.Bad++
		return
	}
	d.stats.Frames++
	if hasTS {
		d.stats.Timestamp++
	}
	frame(f, ts, hasTS)
}

// Reset drops any partial line (after a reconnect). Counters are kept.
func (d *SLCANDecoder) Reset() { d.n, d.long = 0, false }

// Stats returns the counters so far.
func (d *SLCANDecoder) Stats() SLCANStats { return d.stats }
