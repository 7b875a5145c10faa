package metrics

import (
	"math"

	"packwatch/pack"
)

// extremes are one pack's lowest and highest fresh cell voltage and pack
// current over the snapshots of one window. NaN means no value was seen.
type extremes struct {
	CellMin, CellMax float64 // V
	CurMin, CurMax   float64 // A, positive = charging
}

func noExtremes() extremes {
	return extremes{math.NaN(), math.NaN(), math.NaN(), math.NaN()}
}

// fold takes one pack snapshot into the extremes. The cell statistics count
// only fresh cells and the current is nil when stale, so nothing frozen is
// folded in.
func (e *extremes) fold(p *pack.PackSnapshot) {
	if v := p.CellStats.Min; v != nil {
		e.CellMin = lower(e.CellMin, float64(*v))
	}
	if v := p.CellStats.Max; v != nil {
		e.CellMax = higher(e.CellMax, float64(*v))
	}
	if v := p.Current; v != nil {
		e.CurMin = lower(e.CurMin, float64(*v))
		e.CurMax = higher(e.CurMax, float64(*v))
	}
}

// lower is the smaller of a and b, where a NaN a means "none yet"; a NaN b
// is ignored.
func lower(a, b float64) float64 {
	if math.IsNaN(a) || b < a {
		return b
	}
	return a
}

func higher(a, b float64) float64 {
	if math.IsNaN(a) || b > a {
		return b
	}
	return a
}

// window is one scraper's extremes since its previous scrape.
type window struct {
	packs map[string]*extremes
	used  uint64 // take counter at the latest scrape, for eviction
}

func newWindow(s *pack.Snapshot) *window {
	w := &window{packs: make(map[string]*extremes)}
	w.fold(s)
	return w
}

func (w *window) fold(s *pack.Snapshot) {
	if s == nil {
		return
	}
	for i := range s.Packs {
		p := &s.Packs[i]
		e := w.packs[p.ID]
		if e == nil {
			x := noExtremes()
			e = &x
			w.packs[p.ID] = e
		}
		e.fold(p)
	}
}

// windows keeps one window per scraper, at most max, forgetting the least
// recently scraped.
type windows struct {
	max   int
	byKey map[string]*window
	takes uint64
}

func newWindows(max int) windows {
	return windows{max: max, byKey: make(map[string]*window)}
}

// fold takes a snapshot into every scraper's window.
func (ws *windows) fold(s *pack.Snapshot) {
	for _, w := range ws.byKey {
		w.fold(s)
	}
}

// take returns the extremes of key's window and starts its next window
// with latest, the snapshot this scrape exposes: the state at a scrape
// belongs to both windows it separates. A scraper seen for the first time
// gets the extremes of latest alone.
func (ws *windows) take(key string, latest *pack.Snapshot) map[string]extremes {
	w := ws.byKey[key]
	if w == nil {
		w = newWindow(latest)
		ws.evict()
	}
	out := make(map[string]extremes, len(w.packs))
	for id, e := range w.packs {
		out[id] = *e
	}
	ws.takes++
	next := newWindow(latest)
	next.used = ws.takes
	ws.byKey[key] = next
	return out
}

// evict makes room for one more window.
func (ws *windows) evict() {
	for len(ws.byKey) >= ws.max {
		var oldest string
		var used uint64 = math.MaxUint64
		for k, w := range ws.byKey {
			if w.used < used {
				oldest, used = k, w.used
			}
		}
		delete(ws.byKey, oldest)
	}
}
