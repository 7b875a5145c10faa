package pack

import (
	"fmt"
	"math"
	"strings"

	"packwatch/config"
	"packwatch/decode"
)

// role says what a slot means to the pack state.
type role uint8

const (
	roleOther role = iota
	roleCell
	roleBalancing
	roleTemp
	roleCurrent
	roleVoltage
	roleSOC
	roleSerial
	roleChargeV
)

// Aggregate period bounds: aggregates are checked once per cell cycle (the
// longest cell interval), kept within these.
const (
	minAggNs     = 100_000_000
	maxAggNs     = 5_000_000_000
	defaultAggNs = 1_000_000_000
	secondNs     = 1_000_000_000
)

// check is one limit check with its timer: per reading (slot ≥ 0) or on an
// aggregate (slot −1).
type check struct {
	spec   limitSpec // copy of the limit, kept beside the timer for the hot path
	lim    LimitID
	charge bool // applies only while charging (the charge temperature window)
	slot   int32
	subj   int32   // cell or sensor number from 1; 0 for the pack
	value  float64 // latest value compared, NaN when none
	tr     Trip
	alarm  uint64 // open trip alarm, 0 none
}

// alarm is one entry in the alarm list.
type alarm struct {
	id     uint64
	lim    LimitID // for trips
	fault  bool    // a sensor fault (slot) rather than a trip
	slot   int32   // faulted slot
	subj   int32
	since  int64
	value  float64
	active bool
	acked  bool
}

// aggState is what the last aggregate tick computed.
type aggState struct {
	t                      int64
	n                      int // fresh cells
	min, max, avg, sum     float64
	minCell, maxCell       int32
	dev                    float64
	devCell                int32
	spread                 float64
	tn                     int
	tmin, tmax, tspread    float64
	tminSensor, tmaxSensor int32
	rise                   float64 // fastest rise, °C/min, NaN unknown
	riseSensor             int32
}

// series indexes of the pack-level trends.
const (
	trMaxCell = iota
	trMinCell
	trSpread
	trDev
	trMaxTemp
	trMinTemp
	trTempSpread
	trCurrent
	numTrends
)

// slotHot is what the per-update path needs of one slot, kept together so
// that an update touches one cache line of it.
type slotHot struct {
	// band holds the readings inside every check's warn margin, [1] while
	// charging and [0] otherwise: a reading in the band while no check of
	// the slot is off ok changes nothing.
	band     [2][2]float64
	ck0, ck1 int32 // the slot's checks are checks[ck0:ck1]
	notOK    int32 // checks of the slot not at ok
	role     role
	fault    bool // the latest reading was a sensor fault
}

// packState is one pack: its map, readings, checks, counter and alarms.
// Every method runs under the engine's lock.
type packState struct {
	id     string
	m      *decode.Map
	prof   *config.Profile
	v      *decode.Values
	slots  []decode.Slot
	srcMap []int // engine source → profile source; nil = identity
	nsrc   int
	// dataT is the latest data time of this pack's own messages: each pack
	// is judged on its own data, so another pack's (or simulator's) clock
	// running ahead never makes this pack's readings look stale.
	dataT int64

	cellSlot   []int32 // by cell number − 1, −1 none
	balSlot    []int32
	tempSlot   []int32 // by sensor number − 1
	tempRole   []string
	curSlot    int32
	curSrc     int
	voltSlot   int32
	socSlot    int32
	serialSlot int32
	chargeVSlt int32
	staleNs    []int64 // per slot: 3 × its interval, 0 = never stale

	lim      [numLimits]limitSpec
	checks   []check
	aggCheck [numLimits]int32 // aggregate checks by limit, −1 none
	hot      []slotHot        // per slot: what the per-update path needs, in one place
	nextDue  int64

	aggPeriod int64
	nextAgg   int64
	nextSec   int64
	agg       aggState
	trends    [numTrends]Trend
	tempTrend []Trend

	deadband float64
	charging bool
	counter  Counter
	soc      socState
	serial   int64
	serialOK bool

	alarms  []alarm
	profErr string
	updates uint64
	faults  uint64
	idSlots []map[uint32][]int32 // bus view: slots per source and ID, built on first use

	// per profile source, over the last second tick of data time
	rateHz   []float64
	errRate  []float64
	prevMsgs []uint64
	prevErrs []uint64
	prevT    int64
}

func newPackState(id string, m *decode.Map, srcMap []int) *packState {
	p := m.Profile()
	slots := m.Slots()
	ps := &packState{
		id: id, m: m, prof: p, v: decode.NewValues(m), slots: slots, srcMap: srcMap,
		nsrc: len(p.Sources), hot: make([]slotHot, len(slots)),
		staleNs: make([]int64, len(slots)),
		curSlot: -1, voltSlot: -1, socSlot: -1, serialSlot: -1, chargeVSlt: -1, curSrc: -1,
		nextDue: never,
	}
	ps.v.Updated = make([]int32, 0, 64)
	cells := p.Pack.Cells
	sensors := p.Pack.Sensors
	for _, s := range slots {
		if s.Bind.Kind == config.BindTemp && s.Bind.Index > sensors {
			sensors = s.Bind.Index
		}
	}
	ps.cellSlot = filled(cells, -1)
	ps.balSlot = filled(cells, -1)
	ps.tempSlot = filled(sensors, -1)
	ps.tempRole = make([]string, sensors)
	for i := range ps.tempRole {
		ps.tempRole[i] = "cell"
	}
	for _, sn := range p.Sensors {
		if sn.N >= 1 && sn.N <= sensors && sn.Role != "" {
			ps.tempRole[sn.N-1] = sn.Role
		}
	}
	ps.tempTrend = make([]Trend, sensors)

	var aggNs int64
	for i, s := range slots {
		si := int32(i)
		b := s.Bind
		if s.IntervalNs > 0 {
			ps.staleNs[i] = 3 * s.IntervalNs
		}
		switch b.Kind {
		case config.BindCellVoltage:
			if b.Index >= 1 && b.Index <= cells {
				ps.hot[i].role, ps.cellSlot[b.Index-1] = roleCell, si
				aggNs = max(aggNs, s.IntervalNs)
			}
		case config.BindCellBalancing:
			if b.Index >= 1 && b.Index <= cells {
				ps.hot[i].role, ps.balSlot[b.Index-1] = roleBalancing, si
			}
		case config.BindTemp:
			if b.Index >= 1 {
				ps.hot[i].role, ps.tempSlot[b.Index-1] = roleTemp, si
			}
		case config.BindPackCurrent:
			ps.hot[i].role, ps.curSlot, ps.curSrc = roleCurrent, si, s.Src
		case config.BindPackVoltage:
			ps.hot[i].role, ps.voltSlot = roleVoltage, si
		case config.BindPackSOC:
			ps.hot[i].role, ps.socSlot = roleSOC, si
		case config.BindPackSerial:
			ps.hot[i].role, ps.serialSlot = roleSerial, si
		case config.BindBMS:
			if b.Name == "charge_voltage_v" {
				ps.hot[i].role, ps.chargeVSlt = roleChargeV, si
			}
		}
	}
	if aggNs == 0 {
		aggNs = defaultAggNs
	}
	ps.aggPeriod = min(max(aggNs, minAggNs), maxAggNs)

	ps.lim = resolveLimits(p)
	ps.buildChecks()
	ps.recount()

	ps.deadband = DefaultDeadbandA
	if d := p.SOC.CurrentDeadbandA; d != nil && *d >= 0 {
		ps.deadband = *d
	}
	eff := DefaultChargeEfficiency
	if p.SOC.ChargeEfficiency != nil {
		eff = *p.SOC.ChargeEfficiency
	}
	maxGap := int64(DefaultMaxGapNs)
	if ps.curSlot >= 0 && slots[ps.curSlot].IntervalNs > 0 {
		maxGap = 3 * slots[ps.curSlot].IntervalNs
	}
	ps.counter = NewCounter(ps.deadband, eff, maxGap)
	ps.soc = newSOCState(p, ps.socSlot >= 0)
	ps.agg = emptyAgg()

	ps.rateHz = make([]float64, ps.nsrc)
	ps.errRate = make([]float64, ps.nsrc)
	ps.prevMsgs = make([]uint64, ps.nsrc)
	ps.prevErrs = make([]uint64, ps.nsrc)
	return ps
}

func emptyAgg() aggState {
	return aggState{min: nan, max: nan, avg: nan, sum: nan, dev: nan, spread: nan,
		tmin: nan, tmax: nan, tspread: nan, rise: nan}
}

func filled(n int, v int32) []int32 {
	s := make([]int32, n)
	for i := range s {
		s[i] = v
	}
	return s
}

// buildChecks lays out the checks: first the per-reading checks grouped by
// slot in slot order (the per-update path walks checks[ck0:ck1] of the
// slot), then the aggregates, and works out each slot's ok band.
func (ps *packState) buildChecks() {
	per := make([][]LimitID, len(ps.slots))
	for i := range ps.slots {
		switch ps.hot[i].role {
		case roleCell:
			per[i] = []LimitID{LimCellHigh, LimCellLow}
		case roleTemp:
			if ps.tempRole[ps.slots[i].Bind.Index-1] != "ambient" {
				per[i] = []LimitID{LimTempHigh, LimTempLow, LimChargeTempLow, LimChargeTempHigh}
			}
		case roleCurrent:
			per[i] = []LimitID{LimChargeCurrent, LimDischargeCurrent}
		}
	}
	for i := range ps.slots {
		ps.hot[i].ck0 = int32(len(ps.checks))
		for _, l := range per[i] {
			if !ps.lim[l].set {
				continue
			}
			ps.checks = append(ps.checks, check{spec: ps.lim[l], lim: l, slot: int32(i), subj: int32(ps.slots[i].Bind.Index), value: nan,
				charge: l == LimChargeTempLow || l == LimChargeTempHigh})
		}
		ps.hot[i].ck1 = int32(len(ps.checks))
	}
	for i := range ps.slots {
		for ch := range 2 {
			lo, hi := math.Inf(-1), math.Inf(1)
			for k := ps.hot[i].ck0; k < ps.hot[i].ck1; k++ {
				c := &ps.checks[k]
				if c.charge && ch == 0 {
					continue
				}
				if c.spec.upper {
					hi = min(hi, c.spec.bound-c.spec.rule.Warn)
				} else {
					lo = max(lo, c.spec.bound+c.spec.rule.Warn)
				}
			}
			ps.hot[i].band[ch] = [2]float64{lo, hi}
		}
	}
	for i := range ps.aggCheck {
		ps.aggCheck[i] = -1
	}
	for _, l := range []LimitID{LimSpread, LimDeviation, LimTempSpread, LimTempRise} {
		if ps.lim[l].set {
			ps.aggCheck[l] = int32(len(ps.checks))
			ps.checks = append(ps.checks, check{spec: ps.lim[l], lim: l, slot: -1, value: nan})
		}
	}
}

// recount works out notOK from the checks' levels.
func (ps *packState) recount() {
	for i := range ps.hot {
		ps.hot[i].notOK = 0
	}
	for i := range ps.checks {
		if c := &ps.checks[i]; c.slot >= 0 && c.tr.Level != LevelOK {
			ps.hot[c.slot].notOK++
		}
	}
}

// restartReason says why a new profile cannot replace the old one in place,
// or "" when it can.
func restartReason(old, nw *config.Profile) string {
	if old.Pack.Cells != nw.Pack.Cells {
		return fmt.Sprintf("cell count changes from %d to %d", old.Pack.Cells, nw.Pack.Cells)
	}
	if len(old.Sources) != len(nw.Sources) {
		return fmt.Sprintf("number of sources changes from %d to %d", len(old.Sources), len(nw.Sources))
	}
	for i := range old.Sources {
		a, b := old.Sources[i], nw.Sources[i]
		if a != b {
			return fmt.Sprintf("source %q changes", a.Name)
		}
	}
	return ""
}

// swapped returns a new state for map m carrying readings (by binding name),
// counters, timers (by limit and subject), alarms and trends over.
func (ps *packState) swapped(m *decode.Map) *packState {
	np := newPackState(ps.id, m, ps.srcMap)
	np.dataT = ps.dataT
	for i, s := range ps.slots {
		j, ok := m.SlotIndex(s.Name)
		if !ok {
			continue
		}
		np.v.V[j], np.v.Raw[j], np.v.T[j], np.v.Flag[j] = ps.v.V[i], ps.v.Raw[i], ps.v.T[i], ps.v.Flag[i]
		np.hot[j].fault = ps.hot[i].fault
	}
	for i := range np.v.Src {
		if i >= len(ps.v.Src) {
			break
		}
		pat := np.v.Src[i].Patterns
		np.v.Src[i] = ps.v.Src[i]
		copy(pat, ps.v.Src[i].Patterns)
		np.v.Src[i].Patterns = pat
	}
	type key struct {
		lim  LimitID
		subj int32
		agg  bool
	}
	old := make(map[key]*check, len(ps.checks))
	for i := range ps.checks {
		c := &ps.checks[i]
		old[key{c.lim, c.subj, c.slot < 0}] = c
	}
	for i := range np.checks {
		c := &np.checks[i]
		if o := old[key{c.lim, c.subj, c.slot < 0}]; o != nil {
			c.value, c.tr, c.alarm = o.value, o.tr, o.alarm
		}
	}
	np.nextDue = 0 // re-evaluate every timer at the next message
	np.recount()
	// Alarms of slots that no longer exist keep their place (they name their
	// subject by number); fault alarms point at slot indexes: remap them.
	np.alarms = append([]alarm(nil), ps.alarms...)
	for i := range np.alarms {
		a := &np.alarms[i]
		if a.fault && a.slot >= 0 {
			a.slot = -1
			if j, ok := m.SlotIndex(ps.slots[ps.alarms[i].slot].Name); ok {
				a.slot = int32(j)
			}
		}
	}
	np.agg, np.trends, np.nextSec = ps.agg, ps.trends, ps.nextSec
	copy(np.tempTrend, ps.tempTrend)
	np.charging = ps.charging
	cnt := np.counter
	np.counter = ps.counter
	np.counter.DeadbandA, np.counter.Efficiency, np.counter.MaxGapNs = cnt.DeadbandA, cnt.Efficiency, cnt.MaxGapNs
	mode, start, hasBMS := np.soc.mode, np.soc.startPct, np.soc.hasBMS
	np.soc = ps.soc
	np.soc.mode, np.soc.startPct, np.soc.hasBMS = mode, start, hasBMS
	np.serial, np.serialOK = ps.serial, ps.serialOK
	np.updates, np.faults = ps.updates, ps.faults
	copy(np.rateHz, ps.rateHz)
	copy(np.errRate, ps.errRate)
	copy(np.prevMsgs, ps.prevMsgs)
	copy(np.prevErrs, ps.prevErrs)
	np.prevT = ps.prevT
	return np
}

// fresh reports whether slot s holds a valid reading no older than three of
// its intervals at data time now.
func (ps *packState) fresh(s int32, now int64) bool {
	if s < 0 || ps.v.Flag[s] != decode.FlagOK {
		return false
	}
	st := ps.staleNs[s]
	return st == 0 || now-ps.v.T[s] <= st
}

// stale reports whether slot s has a reading older than three intervals.
func (ps *packState) stale(s int32, now int64) bool {
	st := ps.staleNs[s]
	return st > 0 && ps.v.T[s] != 0 && now-ps.v.T[s] > st
}

// subject names a check's or alarm's subject for people.
func (ps *packState) subject(lim LimitID, subj int32) string {
	if subj <= 0 {
		return ""
	}
	switch lim {
	case LimCellHigh, LimCellLow, LimDeviation, LimSpread:
		return fmt.Sprintf("cell %d", subj)
	case LimTempHigh, LimTempLow, LimChargeTempLow, LimChargeTempHigh, LimTempRise, LimTempSpread:
		return fmt.Sprintf("sensor %d", subj)
	}
	return ""
}

// fullCellV is the cell voltage a charge ends at: the BMS's charge voltage
// per cell when reported, else 50 mV under the cell high limit (a charger is
// normally set a little below where the protection trips; common practice,
// no source).
func (ps *packState) fullCellV(now int64) float64 {
	if ps.fresh(ps.chargeVSlt, now) && ps.prof.Pack.Cells > 0 {
		return ps.v.V[ps.chargeVSlt] / float64(ps.prof.Pack.Cells)
	}
	return ps.prof.Limits.CellHighV - 0.05
}

func isAmbient(role string) bool { return strings.EqualFold(role, "ambient") }
