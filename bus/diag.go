package bus

import (
	"fmt"
	"strings"
	"time"
)

// diagnoser turns counters into a plain-words hint for the Connected
// status: no bytes at all, bytes stopped, input unreadable, line saturated.
type diagnoser struct {
	quiet     int64
	period    int64
	connected int64
	lastByte  int64
	total     uint64
	winStart  int64
	winBytes  uint64
	winGood   uint64 // counters at the window start
	winBad    uint64
	hint      string
	overrun   bool
}

func newDiagnoser(spec Spec, now int64, good, bad uint64) *diagnoser {
	period := min(spec.Quiet, time.Second)
	return &diagnoser{quiet: int64(spec.Quiet), period: int64(period), connected: now, winStart: now, winGood: good, winBad: bad}
}

// check accounts for one read of n bytes at now; good and bad are the
// adapter's cumulative counters. It returns the hint and whether it changed.
func (d *diagnoser) check(now int64, n, good, bad uint64, a adapter) (string, bool) {
	if n > 0 {
		d.total += n
		d.winBytes += n
		d.lastByte = now
	}
	if now-d.winStart < d.period {
		return d.hint, false
	}
	w := window{dur: time.Duration(now - d.winStart), bytes: d.winBytes, good: good - d.winGood, bad: bad - d.winBad}
	d.winStart, d.winBytes, d.winGood, d.winBad = now, 0, good, bad
	h := ""
	d.overrun = false
	switch {
	case w.bytes > 0:
		h = a.hint(w)
		if o, ok := a.(interface{ overran(window) bool }); ok {
			d.overrun = o.overran(w)
		}
	case d.total == 0 && now-d.connected >= d.quiet:
		h = fmt.Sprintf("nothing received in the first %v: is the device powered and sending?", time.Duration(d.quiet))
	case d.total > 0 && now-d.lastByte >= d.quiet:
		h = fmt.Sprintf("nothing received in the last %v", time.Duration(d.quiet))
	}
	changed := hintKey(h) != hintKey(d.hint)
	d.hint = h
	return h, changed
}

// hintKey is a hint without its figures in parentheses, so that a condition
// that lasts gives one status, not one per window (Stats.Hint keeps the
// latest figures).
func hintKey(h string) string {
	if i := strings.Index(h, " ("); i >= 0 {
		return h[:i]
	}
	return h
}

// serialCharBits is the number of bits a character takes on the line:
// start bit, data bits, parity bit, stop bits.
func serialCharBits(spec Spec) float64 {
	bits := 1 + float64(spec.DataBits)
	switch spec.Parity {
	case "", "none", "N", "n":
	default:
		bits++
	}
	switch spec.StopBits {
	case "1.5":
		bits += 1.5
	case "2":
		bits += 2
	default:
		bits++
	}
	return bits
}

// lineLoad is the fraction of a serial line's character capacity that w
// used. A real UART cannot exceed 1; a USB virtual serial port ignores the
// baud rate and can.
func lineLoad(spec Spec, w window) float64 {
	if w.dur <= 0 || spec.Baud <= 0 {
		return 0
	}
	capacity := float64(spec.Baud) / serialCharBits(spec) // characters per second
	return float64(w.bytes) / w.dur.Seconds() / capacity
}
