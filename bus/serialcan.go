package bus

import (
	"context"
	"fmt"
	"time"

	"go.einride.tech/can"
)

// slcanLineChars is the length of an 8-byte standard frame line with its
// CR: t + 3 ID digits + DLC + 16 data digits + CR (REFERENCES.md, slcan).
const slcanLineChars = 22

// serialCANAdapter reads a USB-CAN adapter speaking the ASCII serial-line
// CAN protocol. On every connect it writes the open sequence (C, S<n>, L or
// O); on exit it writes C. It writes nothing else.
type serialCANAdapter struct {
	spec    Spec
	dial    *serialDialer
	openSeq []byte
	dec     SLCANDecoder
	lastRef uint64 // refusals counted at the last hint
}

func newSerialCANAdapter(spec Spec) *serialCANAdapter {
	seq, _ := SLCANOpenSequence(spec.Bitrate, spec.Normal) // checked by Open
	return &serialCANAdapter{spec: spec, dial: newSerialDialer(spec), openSeq: seq}
}

func (a *serialCANAdapter) connect(ctx context.Context, idle time.Duration) (link, string, error) {
	p, desc, err := a.dial.open(ctx, idle)
	if err != nil {
		return nil, "", err
	}
	if _, err := p.Write(a.openSeq); err != nil {
		p.Close()
		return nil, "", fmt.Errorf("write open sequence to %s: %w", a.dial.path, err)
	}
	if a.spec.Bitrate != 0 {
		desc += fmt.Sprintf(", CAN %d kbit/s", a.spec.Bitrate/1000)
	}
	if a.spec.Normal {
		desc += ", normal mode (the adapter acknowledges frames)"
	} else {
		desc += ", listen-only"
	}
	return &serialLink{Port: p, path: a.dial.path, lastCheck: time.Now()}, desc, nil
}

func (a *serialCANAdapter) decode(p []byte, t int64, src uint16, out []Message) []Message {
	a.dec.Feed(p, func(f can.Frame, _ uint16, _ bool) {
		out = append(out, Message{T: t, Src: src, Kind: KindCAN, Frame: f})
	})
	return out
}

func (a *serialCANAdapter) reset() { a.dec.Reset() }

func (a *serialCANAdapter) shutdown(l link) {
	if sl, ok := l.(*serialLink); ok {
		_, _ = sl.Write([]byte(SLCANCloseCommand))
	}
}

func (a *serialCANAdapter) counts(st *Stats) (good, bad uint64) {
	s := a.dec.Stats()
	st.Bad, st.Replies, st.Refusals = s.Bad, s.Replies, s.Refusals
	return s.Frames, s.Bad
}

// overran reports a serial line running at its character capacity: a real
// UART that cannot carry the bus (about 520 8-byte frames/s at 115200 baud
// 8N1), so the adapter is dropping frames. A USB virtual port that ignores
// the baud rate runs well above 100 % and is not a problem.
func (a *serialCANAdapter) overran(w window) bool {
	load := lineLoad(a.spec, w)
	return w.good > 0 && load >= 0.9 && load <= 1.1
}

func (a *serialCANAdapter) hint(w window) string {
	refusals := a.dec.Stats().Refusals
	newRef := refusals - a.lastRef
	a.lastRef = refusals
	if w.bytes >= 64 && (w.good == 0 || w.bad > w.good) {
		return fmt.Sprintf("unreadable input: check baud rate (%d bytes, %d frames, %d malformed lines in %v)",
			w.bytes, w.good, w.bad, w.dur.Round(time.Millisecond))
	}
	if newRef > 0 && w.good == 0 {
		mode := "listen-only mode (L)"
		if a.spec.Normal {
			mode = "normal mode (O)"
		}
		return fmt.Sprintf("the adapter refuses commands and sends no frames (%d BEL replies: it may not support %s or the bitrate command, or not speak this protocol)", newRef, mode)
	}
	if a.overran(w) {
		capacity := float64(a.spec.Baud) / serialCharBits(a.spec)
		return fmt.Sprintf("serial line saturated, frames are being lost (%.0f frames/s use %.0f%% of %d baud; this line carries about %.0f 8-byte frames/s: use a faster baud rate or a USB adapter)",
			float64(w.good)/w.dur.Seconds(), 100*lineLoad(a.spec, w), a.spec.Baud, capacity/slcanLineChars)
	}
	return ""
}
