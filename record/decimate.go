package record

import "math"

// Decimator turns a stream of binding values into one StatRow per binding
// per second of data time, for Writer.Stats (the stats table behind fast
// charts). Bindings are addressed by index into the names given to
// NewDecimator, so the per-value path does no string work. A Decimator is
// not safe for concurrent use: the owner (the pack engine, under its lock)
// calls Add and Flush.
type Decimator struct {
	names   []string
	acc     []decAcc
	sec     int64
	started bool
	rows    []StatRow
	emit    func(sec int64, rows []StatRow)
}

type decAcc struct {
	min, max, last float64
	set            bool
}

// NewDecimator makes a Decimator for these bindings; emit receives each
// finished second (rows only for the bindings that had a value in it; emit
// must not keep the slice). Writer.Stats is a suitable emit.
func NewDecimator(names []string, emit func(sec int64, rows []StatRow)) *Decimator {
	return &Decimator{names: names, acc: make([]decAcc, len(names)), emit: emit}
}

// Add takes value v of binding bind at data time t (ns). NaN, infinities and
// unknown bindings are ignored. A value from a second earlier than the
// current one (a late source) counts in the current second; a later second
// first emits the current one.
func (d *Decimator) Add(bind int, t int64, v float64) {
	if bind < 0 || bind >= len(d.acc) || math.IsNaN(v) || math.IsInf(v, 0) {
		return
	}
	sec := floorDiv(t, 1e9)
	if !d.started {
		d.sec, d.started = sec, true
	} else if sec > d.sec {
		d.Flush()
		d.sec, d.started = sec, true
	}
	a := &d.acc[bind]
	if !a.set {
		*a = decAcc{min: v, max: v, last: v, set: true}
		return
	}
	a.min = min(a.min, v)
	a.max = max(a.max, v)
	a.last = v
}

// Flush emits the current second, if it has values, and starts afresh.
func (d *Decimator) Flush() {
	if !d.started {
		return
	}
	d.rows = d.rows[:0]
	for i := range d.acc {
		if a := &d.acc[i]; a.set {
			d.rows = append(d.rows, StatRow{Bind: d.names[i], Min: a.min, Max: a.max, Last: a.last})
			a.set = false
		}
	}
	d.started = false
	if len(d.rows) > 0 {
		d.emit(d.sec, d.rows)
	}
}
