package metrics

import (
	"math"
	"sort"
	"strconv"

	"github.com/prometheus/client_golang/prometheus"

	"packwatch/pack"
)

// collector builds the const metrics of one view at one scrape. It
// describes nothing in advance (an unchecked collector): which series
// exist depends on which readings are fresh.
type collector struct {
	d *descs
	v view
}

// Describe implements prometheus.Collector; it sends nothing, which makes
// the collector unchecked.
func (c *collector) Describe(chan<- *prometheus.Desc) {}

// Collect implements prometheus.Collector.
func (c *collector) Collect(ch chan<- prometheus.Metric) {
	e := emitter{ch: ch}
	d := c.d
	s := c.v.snap
	mode := ""
	if s != nil {
		mode = s.Mode
	}
	e.gauge(d.info, 1, mode, c.v.version)
	if s == nil {
		return
	}
	e.counter(d.snapshots, float64(s.Seq))
	if s.DataT > 0 {
		e.gauge(d.dataTime, float64(s.DataT))
	}
	for i := range s.Packs {
		p := &s.Packs[i]
		c.pack(&e, p)
		c.sources(&e, p)
	}
}

// fresh reports whether a cell's or sensor's state word means a current
// reading (not stale, missing or faulty).
func fresh(state string) bool {
	return state == "ok" || state == "warn" || state == "trip"
}

func (c *collector) pack(e *emitter, p *pack.PackSnapshot) {
	d := c.d
	id := p.ID
	e.gauge(d.packInfo, 1, id, p.Name, p.Serial)
	e.stateSet(d.packState, levelStates, p.State, id)
	e.gauge(d.cellsReporting, float64(p.CellStats.Reporting), id)

	for _, cell := range p.Cells {
		if !fresh(cell.State) {
			continue
		}
		n := strconv.Itoa(cell.N)
		e.gaugeP(d.cellVolts, cell.V, id, n)
		if cell.Balancing != nil {
			e.gauge(d.cellBalancing, b2f(*cell.Balancing), id, n)
		}
	}
	for _, t := range p.Temps {
		if fresh(t.State) {
			e.gaugeP(d.tempC, t.C, id, strconv.Itoa(t.N), t.Role)
		}
	}
	e.gaugeP(d.current, p.Current, id)
	e.gaugeP(d.voltage, p.Voltage, id)
	e.gaugeP(d.power, p.Power, id)

	// State of charge and counted charge.
	// A counted state of charge stands still while the current is stale:
	// dropped with it rather than frozen. The BMS's own is nil when stale.
	counted := p.SOC.Source == "counted" || p.SOC.Source == "uncertain"
	if p.SOC.Pct != nil && (p.Current != nil || !counted) {
		e.gauge(d.socRatio, float64(*p.SOC.Pct)/100, id)
	}
	e.stateSet(d.socBasis, socBases, p.SOC.Source, id)
	e.counter(d.charge, 3600*float64(p.SOC.AhIn), id, "in")
	e.counter(d.charge, 3600*float64(p.SOC.AhOut), id, "out")
	e.counter(d.energy, 3600*float64(p.SOC.WhIn), id, "in")
	e.counter(d.energy, 3600*float64(p.SOC.WhOut), id, "out")
	e.gaugeP(d.toFull, p.SOC.ToFullS, id)
	e.gaugeP(d.toEmpt, p.SOC.ToEmptyS, id)

	// Extremes since this scraper's previous scrape.
	if x, ok := c.v.ext[id]; ok {
		e.gaugeF(d.cellLowest, x.CellMin, id)
		e.gaugeF(d.cellHighest, x.CellMax, id)
		e.gaugeF(d.curLowest, x.CurMin, id)
		e.gaugeF(d.curHighest, x.CurMax, id)
	}

	// Margins, bounds and states of every limit the profile sets.
	for _, m := range p.Margins {
		// A unit this package does not know has no metric name: such a
		// limit gets its state, not its margin.
		if u, ok := limitUnits[m.Unit]; ok {
			if m.Margin != nil {
				e.gauge(d.margin[u.suffix], u.factor*float64(*m.Margin), id, m.Limit)
			}
			e.gauge(d.bound[u.suffix], u.factor*float64(m.Bound), id, m.Limit)
		}
		e.stateSet(d.limitState, levelStates, m.State, id, m.Limit)
		e.gaugeP(d.toLimit, m.ToLimitS, id, m.Limit)
	}

	// Alarms.
	if pt, ok := c.v.trips[id]; ok {
		lims := make([]string, 0, len(pt.ByLim))
		for l := range pt.ByLim {
			lims = append(lims, l)
		}
		sort.Strings(lims)
		for _, l := range lims {
			e.counter(d.trips, float64(pt.ByLim[l]), id, l)
		}
		e.counter(d.faults, float64(pt.Faults), id)
	}
	active := map[string]float64{"trip": 0, "fault": 0}
	var unacked float64
	for _, a := range p.Alarms {
		if a.Active && a.Level != "" {
			active[a.Level]++
		}
		if !a.Acked {
			unacked++
		}
	}
	levels := make([]string, 0, len(active))
	for l := range active {
		levels = append(levels, l)
	}
	sort.Strings(levels)
	for _, l := range levels {
		e.gauge(d.alarmsActive, active[l], id, l)
	}
	e.gauge(d.alarmsUnacked, unacked, id)
	e.counter(d.decodeFaults, float64(p.Decode.Faults), id)
}

func (c *collector) sources(e *emitter, p *pack.PackSnapshot) {
	d := c.d
	for _, s := range p.Sources {
		l := []string{p.ID, s.Name}
		e.gauge(d.srcInfo, 1, p.ID, s.Name, s.Kind)
		if s.State != "unknown" && s.State != "" {
			e.gauge(d.srcConnected, b2f(s.State == "connected"), l...)
		}
		e.gaugeP(d.srcAge, s.Age, l...)
		e.counter(d.srcMessages, float64(s.Messages), l...)
		e.counter(d.srcErrors, float64(s.DecodeErrors), l...)
		e.counter(d.srcUnknown, float64(s.Unknown), l...)
		e.counter(d.srcGaps, float64(s.Gaps), l...)
	}
}

// round12 rounds to 12 significant digits, as /api/state's JSON does
// (pack.Num): it drops the binary noise of scaling and sums
// (44.410000000000004 → 44.41), so both give the same numbers.
func round12(v float64) float64 {
	if v == 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'g', 12, 64), 64)
	if err != nil {
		return v
	}
	return r
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// emitter sends const metrics, skipping missing values.
type emitter struct {
	ch chan<- prometheus.Metric
}

func (e *emitter) send(d *prometheus.Desc, t prometheus.ValueType, v float64, labels ...string) {
	m, err := prometheus.NewConstMetric(d, t, round12(v), labels...)
	if err != nil {
		m = prometheus.NewInvalidMetric(d, err) // reported by Gather, never a panic
	}
	e.ch <- m
}

func (e *emitter) gauge(d *prometheus.Desc, v float64, labels ...string) {
	e.send(d, prometheus.GaugeValue, v, labels...)
}

func (e *emitter) counter(d *prometheus.Desc, v float64, labels ...string) {
	e.send(d, prometheus.CounterValue, v, labels...)
}

// gaugeP sends a gauge when p holds a value.
func (e *emitter) gaugeP(d *prometheus.Desc, p *pack.Num, labels ...string) {
	if p != nil {
		e.gaugeF(d, float64(*p), labels...)
	}
}

// gaugeF sends a gauge unless v is NaN (no value).
func (e *emitter) gaugeF(d *prometheus.Desc, v float64, labels ...string) {
	if !math.IsNaN(v) {
		e.gauge(d, v, labels...)
	}
}

// stateSet sends one 0/1 series per state, 1 for the current one. A state
// outside the list gets its own series with 1, so nothing is hidden.
func (e *emitter) stateSet(d *prometheus.Desc, states []string, cur string, labels ...string) {
	found := false
	for _, st := range states {
		on := st == cur
		found = found || on
		e.gauge(d, b2f(on), append(labels[:len(labels):len(labels)], st)...)
	}
	if !found && cur != "" {
		e.gauge(d, 1, append(labels[:len(labels):len(labels)], cur)...)
	}
}
