package bus

import (
	"context"
	"fmt"
	"time"
)

// serialTextAdapter reads a console printing text lines.
type serialTextAdapter struct {
	spec Spec
	dial *serialDialer
	sp   LineSplitter
}

func newSerialTextAdapter(spec Spec) *serialTextAdapter {
	return &serialTextAdapter{spec: spec, dial: newSerialDialer(spec)}
}

func (a *serialTextAdapter) connect(ctx context.Context, idle time.Duration) (link, string, error) {
	p, desc, err := a.dial.open(ctx, idle)
	if err != nil {
		return nil, "", err
	}
	return &serialLink{Port: p, path: a.dial.path, lastCheck: time.Now()}, desc, nil
}

func (a *serialTextAdapter) decode(p []byte, t int64, src uint16, out []Message) []Message {
	a.sp.Feed(p, func(l string) {
		out = append(out, Message{T: t, Src: src, Kind: KindLine, Text: l})
	})
	return out
}

func (a *serialTextAdapter) reset()        { a.sp.Reset() }
func (a *serialTextAdapter) shutdown(link) {}

func (a *serialTextAdapter) counts(st *Stats) (good, bad uint64) {
	s := a.sp.Stats()
	st.Bad, st.Cut = s.Bad(), s.Cut
	return s.Lines, s.Bad()
}

func (a *serialTextAdapter) hint(w window) string {
	switch {
	case w.bytes >= 32 && w.bad*10 > w.bytes:
		return fmt.Sprintf("unreadable input: check baud rate (%d of %d bytes were not text in %v)", w.bad, w.bytes, w.dur.Round(time.Millisecond))
	case w.bytes >= 512 && w.good == 0:
		return fmt.Sprintf("bytes but no lines: check baud rate and line endings (%d bytes in %v)", w.bytes, w.dur.Round(time.Millisecond))
	}
	return ""
}
