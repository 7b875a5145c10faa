package analyze

import (
	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
)

// Collector decodes raw messages through a compiled profile and keeps the
// readings the analysis needs as traces. It is not safe for concurrent use.
//
//	c := analyze.NewCollector(m)
//	reader.Scan(ctx, from, to, func(b []bus.Message) error { c.Add(b); return nil })
//	s := c.Session()
type Collector struct {
	m       *decode.Map
	v       *decode.Values
	s       *Session
	dst     []*Trace // per slot: the trace it feeds, nil for none
	flag    []bool   // per slot: a flag, kept only when it changes
	started bool
}

// NewCollector makes a collector for a compiled profile.
func NewCollector(m *decode.Map) *Collector {
	p := m.Profile()
	s := &Session{Pack: PackInfo{Name: p.Pack.Name, Cells: p.Pack.Cells, Sensors: p.Pack.Sensors,
		CapacityAh: p.Pack.CapacityAh, Chemistry: p.Pack.Chemistry}}
	s.Cells = make([]Trace, p.Pack.Cells)
	s.Temps = make([]Trace, p.Pack.Sensors)
	s.Pack.SensorRoles = make([]string, p.Pack.Sensors)
	for _, sn := range p.Sensors {
		if sn.N >= 1 && sn.N <= p.Pack.Sensors {
			s.Pack.SensorRoles[sn.N-1] = sn.Role
		}
	}
	c := &Collector{s: s}
	c.Use(m)
	return c
}

// Use switches to another compiled version of the same pack's profile (a
// recording stores every version with the data time it took effect): the
// messages added from now on decode through m, into the same traces. A
// version with another cell or sensor count keeps only the positions both
// have.
func (c *Collector) Use(m *decode.Map) {
	c.m = m
	c.v = decode.NewValues(m)
	slots := m.Slots()
	c.dst = make([]*Trace, len(slots))
	c.flag = make([]bool, len(slots))
	for i, sl := range slots {
		c.dst[i] = c.s.traceFor(sl.Bind)
		c.flag[i] = sl.Bind.Bool()
	}
}

// traceFor maps a binding to the trace that keeps it.
func (s *Session) traceFor(b config.Binding) *Trace {
	switch b.Kind {
	case config.BindCellVoltage:
		if b.Index >= 1 && b.Index <= len(s.Cells) {
			return &s.Cells[b.Index-1]
		}
	case config.BindTemp:
		if b.Index >= 1 && b.Index <= len(s.Temps) {
			return &s.Temps[b.Index-1]
		}
	case config.BindPackCurrent:
		return &s.Current
	case config.BindPackVoltage:
		return &s.PackV
	case config.BindPackSOC:
		return &s.SOC
	case config.BindLinkVoltage:
		return &s.Link
	case config.BindContactor:
		switch b.Name {
		case "main":
			return &s.Main
		case "main.command":
			return &s.MainCommand
		case "precharge":
			return &s.Precharge
		}
	}
	return nil
}

// SetStart fixes the data time (ns) of t = 0; by default it is the first
// message's time.
func (c *Collector) SetStart(t int64) {
	c.s.Start = t
	c.started = true
}

// Add decodes a batch. The batch is not kept.
func (c *Collector) Add(batch []bus.Message) {
	for i := range batch {
		msg := &batch[i]
		if !c.started {
			c.SetStart(msg.T)
		}
		c.s.Messages++
		t := float64(msg.T-c.s.Start) / 1e9
		if msg.Kind == bus.KindGap {
			c.s.Gaps = append(c.s.Gaps, t)
			continue
		}
		c.v.Updated = c.v.Updated[:0]
		c.m.Decode(msg, c.v)
		for _, slot := range c.v.Updated {
			tr := c.dst[slot]
			if tr == nil || c.v.Flag[slot] != decode.FlagOK {
				continue
			}
			v := c.v.V[slot]
			if c.flag[slot] {
				if v != 0 {
					v = 1
				}
				if n := len(tr.V); n > 0 && tr.V[n-1] == v {
					continue // a flag is kept only when it changes
				}
			}
			tr.Add(t, v)
		}
	}
}

// Grow reserves room for about n more messages, spread over the traces in
// proportion to what they hold so far (an estimate from the first batches).
func (c *Collector) Grow(n int) {
	if c.s.Messages == 0 || n <= 0 {
		return
	}
	for _, tr := range c.s.traces() {
		if tr.Len() == 0 {
			continue
		}
		want := len(tr.T) + int(float64(n)*float64(len(tr.T))/float64(c.s.Messages))
		if cap(tr.T) < want {
			t := make([]float64, len(tr.T), want)
			v := make([]float64, len(tr.V), want)
			copy(t, tr.T)
			copy(v, tr.V)
			tr.T, tr.V = t, v
		}
	}
}

// Session finishes and returns the collected session. Call it once, after
// the last Add.
func (c *Collector) Session() *Session {
	c.s.Finish()
	return c.s
}

// Messages is the number of messages added so far.
func (c *Collector) Messages() int { return c.s.Messages }
