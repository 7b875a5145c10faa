package main

import (
	"math"

	"packwatch/bus"
	"packwatch/decode"
	"packwatch/record"
)

// statsRecorder is the engine's raw sink during a recording: it hands every
// batch to the recorder unchanged and keeps the decimated chart table (min,
// max and last per binding per second of data time). It decodes with its
// own Values (about 30 ns a frame), so the engine's state is not shared.
type statsRecorder struct {
	rec   *record.Writer
	packs []statsPack
	sec   int64
	rows  []record.StatRow
}

type statsPack struct {
	prefix string
	m      *decode.Map
	srcMap []int
	v      *decode.Values
	acc    []statAcc
}

type statAcc struct {
	n              int
	min, max, last float64
}

func newStatsRecorder(rec *record.Writer, packs []*packEntry) *statsRecorder {
	s := &statsRecorder{rec: rec, sec: math.MinInt64}
	for _, p := range packs {
		prefix := ""
		if len(packs) > 1 {
			prefix = p.id + ":"
		}
		s.packs = append(s.packs, statsPack{prefix: prefix, m: p.m, srcMap: p.srcMap, v: decode.NewValues(p.m), acc: make([]statAcc, len(p.m.Slots()))})
	}
	return s
}

// Write implements pack.RawSink.
func (s *statsRecorder) Write(batch []bus.Message) {
	s.rec.Write(batch)
	for i := range batch {
		msg := batch[i]
		sec := floorSec(msg.T)
		if sec != s.sec {
			s.flush()
			s.sec = sec
		}
		for pi := range s.packs {
			p := &s.packs[pi]
			if int(msg.Src) >= len(p.srcMap) || p.srcMap[msg.Src] < 0 {
				continue
			}
			m := msg
			m.Src = uint16(p.srcMap[msg.Src])
			p.v.Updated = p.v.Updated[:0]
			p.m.Decode(&m, p.v)
			for _, sl := range p.v.Updated {
				if p.v.Flag[sl] != decode.FlagOK {
					continue
				}
				x, a := p.v.V[sl], &p.acc[sl]
				if a.n == 0 || x < a.min {
					a.min = x
				}
				if a.n == 0 || x > a.max {
					a.max = x
				}
				a.last = x
				a.n++
			}
		}
	}
}

// flush hands the finished second to the recorder.
func (s *statsRecorder) flush() {
	if s.sec == math.MinInt64 {
		return
	}
	s.rows = s.rows[:0]
	for pi := range s.packs {
		p := &s.packs[pi]
		for sl := range p.acc {
			a := &p.acc[sl]
			if a.n > 0 {
				s.rows = append(s.rows, record.StatRow{Bind: p.prefix + p.m.Slots()[sl].Name, Min: a.min, Max: a.max, Last: a.last})
			}
			*a = statAcc{}
		}
	}
	if len(s.rows) > 0 {
		s.rec.Stats(s.sec, s.rows)
	}
}

func floorSec(t int64) int64 {
	s := t / 1e9
	if t < 0 && t%1e9 != 0 {
		s--
	}
	return s
}
