package server

import (
	"encoding/json"
	"math"
	"strconv"
	"sync"

	"packwatch/pack"
)

// maxHistoryPoints bounds the points per series sent on connect; longer
// histories are thinned by taking every k-th point.
const maxHistoryPoints = 1500

// history keeps the chart series of every pack over the last window seconds
// of data time, so a page that connects has full charts at once. It is fed
// by the hub goroutine and read by connecting clients.
type history struct {
	mu     sync.Mutex
	window float64 // seconds of data time
	packs  map[string]*series
	order  []string
	lastT  float64
}

// series is one pack's chart data; NaN marks a missing value.
type series struct {
	t, volt, curr, cmin, cmax, tmax []float64
}

func newHistory(windowS float64) *history {
	return &history{window: windowS, packs: make(map[string]*series)}
}

// add appends one snapshot's chart values. A data time that goes backwards
// (a replay seek, a restarted simulator) starts the history afresh.
func (h *history) add(s *pack.Snapshot) {
	t := float64(s.DataT)
	if math.IsNaN(t) || math.IsInf(t, 0) {
		return
	}
	h.mu.Lock()
	defer h.mu.Unlock()
	if t < h.lastT {
		h.packs = make(map[string]*series)
		h.order = h.order[:0]
	}
	if t == h.lastT && len(h.packs) > 0 {
		return // no new data time: a paused replay adds nothing
	}
	h.lastT = t
	for i := range s.Packs {
		p := &s.Packs[i]
		sr := h.packs[p.ID]
		if sr == nil {
			sr = &series{}
			h.packs[p.ID] = sr
			h.order = append(h.order, p.ID)
		}
		sr.t = append(sr.t, t)
		sr.volt = append(sr.volt, num(p.Voltage))
		sr.curr = append(sr.curr, num(p.Current))
		sr.cmin = append(sr.cmin, num(p.CellStats.Min))
		sr.cmax = append(sr.cmax, num(p.CellStats.Max))
		sr.tmax = append(sr.tmax, num(p.TempStats.Max))
		sr.trim(t - h.window)
	}
}

// trim drops points older than from, copying down only when a quarter of
// the backing array is dead so appends stay amortised O(1).
func (sr *series) trim(from float64) {
	k := 0
	for k < len(sr.t) && sr.t[k] < from {
		k++
	}
	if k == 0 || k < cap(sr.t)/4 && k < 64 {
		return
	}
	cut := func(a []float64) []float64 { return append(a[:0], a[k:]...) }
	sr.t, sr.volt, sr.curr = cut(sr.t), cut(sr.volt), cut(sr.curr)
	sr.cmin, sr.cmax, sr.tmax = cut(sr.cmin), cut(sr.cmax), cut(sr.tmax)
}

// marshal encodes the history as the data of a "history" message:
// {"window_s":600,"packs":[{"id":..,"t":[..],"voltage_v":[..],"current_a":[..],
// "cell_min_v":[..],"cell_max_v":[..],"temp_max_c":[..]}]}, null for missing.
func (h *history) marshal() []byte {
	h.mu.Lock()
	defer h.mu.Unlock()
	b := make([]byte, 0, 4096)
	b = append(b, `{"window_s":`...)
	b = strconv.AppendFloat(b, h.window, 'g', -1, 64)
	b = append(b, `,"packs":[`...)
	for i, id := range h.order {
		sr := h.packs[id]
		if i > 0 {
			b = append(b, ',')
		}
		from := 0
		if len(sr.t) > 0 && sr.t[0] < h.lastT-h.window {
			for from < len(sr.t) && sr.t[from] < h.lastT-h.window {
				from++
			}
		}
		n := len(sr.t) - from
		step := 1
		if n > maxHistoryPoints {
			step = (n + maxHistoryPoints - 1) / maxHistoryPoints
		}
		idj, _ := json.Marshal(id)
		b = append(b, `{"id":`...)
		b = append(b, idj...)
		for _, f := range []struct {
			name string
			v    []float64
		}{{"t", sr.t}, {"voltage_v", sr.volt}, {"current_a", sr.curr}, {"cell_min_v", sr.cmin}, {"cell_max_v", sr.cmax}, {"temp_max_c", sr.tmax}} {
			b = append(b, `,"`...)
			b = append(b, f.name...)
			b = append(b, `":[`...)
			first := true
			// Walk from the newest point back so the latest is always included.
			start := from + (n-1)%step
			for j := start; j < len(f.v); j += step {
				if !first {
					b = append(b, ',')
				}
				first = false
				b = appendNum(b, f.v[j])
			}
			b = append(b, ']')
		}
		b = append(b, '}')
	}
	b = append(b, "]}"...)
	return b
}

func num(n *pack.Num) float64 {
	if n == nil {
		return math.NaN()
	}
	return float64(*n)
}

func appendNum(b []byte, f float64) []byte {
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return append(b, "null"...)
	}
	return strconv.AppendFloat(b, f, 'g', -1, 64)
}
