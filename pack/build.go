package pack

import (
	"cmp"
	"math"
	"slices"
	"strconv"

	"packwatch/decode"
)

func num(f float64) Num { // for non-pointer fields: NaN and Inf become 0
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return 0
	}
	return Num(f)
}

func secs(ns int64) float64 { return float64(ns) / 1e9 }

// snapshot builds the pack's state at data time now. Derived values are
// worked out here, once per tick, from the latest readings.
func (ps *packState) snapshot(now int64, status []srcStatus) PackSnapshot {
	p := ps.prof
	out := PackSnapshot{ID: ps.id, Name: p.Pack.Name, Serial: p.Pack.Serial, ProfileError: ps.profErr}
	if ps.serialOK {
		out.Serial = strconv.FormatInt(ps.serial, 10)
	}

	// Cells and their statistics.
	out.Cells = make([]CellSnap, len(ps.cellSlot))
	cs := &out.CellStats
	mn, mx, sum, n := math.Inf(1), math.Inf(-1), 0.0, 0
	for i, s := range ps.cellSlot {
		c := &out.Cells[i]
		c.N = i + 1
		c.State = ps.readingState(s, now)
		if b := ps.balSlot[i]; ps.fresh(b, now) {
			on := ps.v.V[b] != 0
			c.Balancing = &on
		}
		if s < 0 || ps.v.T[s] == 0 {
			continue
		}
		c.Age = numPtr(secs(now - ps.v.T[s]))
		if ps.v.Flag[s] != decode.FlagOK {
			continue
		}
		v := ps.v.V[s]
		c.V = numPtr(v)
		if c.State != "ok" && c.State != "warn" && c.State != "trip" {
			continue // stale: shown, not counted
		}
		n++
		sum += v
		if v < mn {
			mn, cs.MinCell = v, i+1
		}
		if v > mx {
			mx, cs.MaxCell = v, i+1
		}
	}
	cs.Reporting = n
	avg, dev := nan, nan
	if n > 0 {
		avg = sum / float64(n)
		dev = -1.0
		for i, s := range ps.cellSlot {
			if c := &out.Cells[i]; c.V != nil && (c.State == "ok" || c.State == "warn" || c.State == "trip") {
				if d := math.Abs(ps.v.V[s] - avg); d > dev {
					dev, cs.DevCell = d, i+1
				}
			}
		}
		cs.Min, cs.Max, cs.Avg = numPtr(mn), numPtr(mx), numPtr(avg)
		cs.Spread, cs.Deviation = numPtr(mx-mn), numPtr(dev)
		out.Cells[cs.MinCell-1].Min = true
		out.Cells[cs.MaxCell-1].Max = true
	}

	// Temperatures.
	out.Temps = make([]TempSnap, len(ps.tempSlot))
	ts := &out.TempStats
	tmin, tmax := math.Inf(1), math.Inf(-1)
	for i, s := range ps.tempSlot {
		tp := &out.Temps[i]
		tp.N, tp.Role = i+1, ps.tempRole[i]
		tp.State = ps.readingState(s, now)
		if s < 0 || ps.v.T[s] == 0 {
			continue
		}
		tp.Age = numPtr(secs(now - ps.v.T[s]))
		if ps.v.Flag[s] != decode.FlagOK {
			continue
		}
		v := ps.v.V[s]
		tp.C = numPtr(v)
		if isAmbient(tp.Role) || !ps.fresh(s, now) {
			continue
		}
		if v < tmin {
			tmin, ts.MinSensor = v, i+1
		}
		if v > tmax {
			tmax, ts.MaxSensor = v, i+1
		}
	}
	if ts.MinSensor > 0 {
		ts.Min, ts.Max = numPtr(tmin), numPtr(tmax)
	}
	ts.RiseCPerMin = numPtr(ps.agg.rise)

	// Current, voltage, power.
	cur := nan
	if ps.fresh(ps.curSlot, now) {
		cur = ps.v.V[ps.curSlot]
		out.Current = numPtr(cur)
		switch {
		case cur > ps.deadband:
			out.CurrentWord = "charging"
		case cur < -ps.deadband:
			out.CurrentWord = "discharging"
		default:
			out.CurrentWord = "rest"
		}
	}
	volt := nan
	out.VoltageSource = "none"
	switch {
	case ps.fresh(ps.voltSlot, now):
		volt, out.VoltageSource = ps.v.V[ps.voltSlot], "reported"
	case n == len(ps.cellSlot) && n > 0:
		volt, out.VoltageSource = sum, "sum"
	}
	out.Voltage = numPtr(volt)
	out.Power = numPtr(volt * cur)

	out.SOC = ps.socSnap(now, cur, mx)
	out.Margins = ps.margins(now, &out)
	out.Alarms = ps.alarmSnaps()
	out.Values = ps.valueSnaps(now)
	out.Sources = ps.sourceSnaps(now, status)
	out.Decode = DecodeStats{Updates: ps.updates, Faults: ps.faults}
	for i := range ps.v.Src {
		out.Decode.Errors += ps.v.Src[i].DecodeErrors
	}
	l := &p.Limits
	out.Limits = LimitsSnap{CellLowV: num(l.CellLowV), CellHighV: num(l.CellHighV),
		WarnCellV: num(ps.lim[LimCellHigh].rule.Warn), WarnTempC: num(ps.lim[LimTempHigh].rule.Warn)}
	if l.TempLowC != nil {
		out.Limits.TempLowC = numPtr(*l.TempLowC)
	}
	if l.TempHighC != nil {
		out.Limits.TempHighC = numPtr(*l.TempHighC)
	}
	if !ps.lim[LimTempHigh].set {
		out.Limits.WarnTempC = num(ps.lim[LimTempLow].rule.Warn)
	}
	out.State = ps.packLevel(&out)
	return out
}

// readingState is the state word of a cell or sensor reading.
func (ps *packState) readingState(s int32, now int64) string {
	if s < 0 {
		return "missing"
	}
	switch ps.v.Flag[s] {
	case decode.FlagFault:
		return "fault"
	case decode.FlagNone, decode.FlagInvalid:
		return "missing"
	}
	if ps.stale(s, now) {
		return "stale"
	}
	lv := LevelOK
	for k := ps.hot[s].ck0; k < ps.hot[s].ck1; k++ {
		c := &ps.checks[k]
		if c.tr.Level > lv {
			lv = c.tr.Level
		}
	}
	return lv.String()
}

func (ps *packState) socSnap(now int64, cur, maxCell float64) SOCSnap {
	capAh := ps.prof.Pack.CapacityAh
	c := &ps.counter
	out := SOCSnap{Source: "none", CapacityAh: num(capAh),
		AhIn: num(c.InAs / 3600), AhOut: num(c.OutAs / 3600), WhIn: num(c.InWs / 3600), WhOut: num(c.OutWs / 3600)}
	z := nan
	switch {
	case ps.soc.mode == socBMS && ps.fresh(ps.socSlot, now):
		z, out.Source = ps.v.V[ps.socSlot]/100, "bms"
	case ps.soc.anchored:
		z, out.Source = ps.soc.z(c.NetAs, capAh), "counted"
		if ps.soc.uncertain {
			out.Source = "uncertain"
		}
	}
	if !math.IsNaN(z) {
		z = math.Min(math.Max(z, 0), 1)
		out.Pct = numPtr(100 * z)
		inCV := !math.IsNaN(maxCell) && maxCell >= ps.fullCellV(now)-0.03
		out.ToFullS = numPtr(TimeToFull(z, capAh, cur, inCV))
		out.ToEmptyS = numPtr(TimeToEmpty(z, capAh, cur))
	}
	return out
}

// trendOf maps a limit to the trend of the value it compares, −1 none.
var trendOf = [numLimits]int{
	LimCellHigh: trMaxCell, LimCellLow: trMinCell, LimSpread: trSpread, LimDeviation: trDev,
	LimTempHigh: trMaxTemp, LimTempLow: trMinTemp, LimChargeTempLow: trMinTemp, LimChargeTempHigh: trMaxTemp,
	LimTempRise: -1, LimTempSpread: trTempSpread, LimChargeCurrent: trCurrent, LimDischargeCurrent: trCurrent,
}

// maxToLimitS: a trend that would take longer than a day to reach a limit
// counts as not trending toward it (rounding in a flat series gives slopes
// of 1e-17 and "years to the limit").
const maxToLimitS = 86400

var levelRank = [...]int{LevelTrip: 0, LevelWarn: 1, LevelOK: 2, LevelNoData: 3}

// margins lists every limit the profile sets with its signed margin and
// state, nearest trip first: tripped, then warn, then ok, then no data;
// within a state by the margin in units of its warn margin (of the bound
// when the warn margin is 0). The charge window shows only while charging.
func (ps *packState) margins(now int64, out *PackSnapshot) []Margin {
	type ranked struct {
		m     Margin
		lv    Level
		close float64
	}
	var list []ranked
	cs, ts := &out.CellStats, &out.TempStats
	for l := LimitID(0); l < numLimits; l++ {
		spec := &ps.lim[l]
		if !spec.set {
			continue
		}
		if (l == LimChargeTempLow || l == LimChargeTempHigh) && !ps.charging {
			continue
		}
		value, subj := nan, int32(0)
		switch l {
		case LimCellHigh:
			value, subj = ptrVal(cs.Max), int32(cs.MaxCell)
		case LimCellLow:
			value, subj = ptrVal(cs.Min), int32(cs.MinCell)
		case LimSpread:
			value = ptrVal(cs.Spread)
		case LimDeviation:
			value, subj = ptrVal(cs.Deviation), int32(cs.DevCell)
		case LimTempHigh, LimChargeTempHigh:
			value, subj = ptrVal(ts.Max), int32(ts.MaxSensor)
		case LimTempLow, LimChargeTempLow:
			value, subj = ptrVal(ts.Min), int32(ts.MinSensor)
		case LimTempRise:
			value, subj = ps.agg.rise, ps.agg.riseSensor
		case LimTempSpread:
			if ts.Max != nil {
				value = float64(*ts.Max - *ts.Min)
			}
		case LimChargeCurrent, LimDischargeCurrent:
			value = ptrVal(out.Current)
		}
		margin := spec.margin(value)
		lv := LevelNoData
		if !math.IsNaN(margin) {
			lv = levelOf(margin, spec.rule.Warn)
		}
		// A tripped check of this limit rules, with its own subject and value.
		for i := range ps.checks {
			c := &ps.checks[i]
			if c.lim == l && c.tr.Level == LevelTrip {
				lv = LevelTrip
				if c.subj > 0 && !math.IsNaN(c.value) {
					subj, value, margin = c.subj, c.value, spec.margin(c.value)
				}
				break
			}
		}
		m := Margin{Limit: l.String(), Label: limitLabels[l], Unit: limitUnits[l],
			Value: numPtr(value), Bound: num(spec.bound), Margin: numPtr(margin),
			Warn: num(spec.rule.Warn), State: lv.String(), Subject: ps.subject(l, subj)}
		if tr := trendOf[l]; tr >= 0 && !math.IsNaN(margin) {
			if slope, ok := ps.trends[tr].Slope(ps.agg.t); ok {
				rate := slope // d(margin)/dt
				if spec.upper {
					rate = -slope
				}
				switch {
				case margin <= 0:
					m.ToLimitS = numPtr(0)
				case rate < 0 && margin/-rate <= maxToLimitS:
					m.ToLimitS = numPtr(margin / -rate)
				}
			}
		}
		scale := spec.rule.Warn
		if scale <= 0 {
			scale = math.Max(math.Abs(spec.bound), 1)
		}
		close := math.Inf(1)
		if !math.IsNaN(margin) {
			close = margin / scale
		}
		list = append(list, ranked{m, lv, close})
	}
	slices.SortStableFunc(list, func(a, b ranked) int {
		if c := cmp.Compare(levelRank[a.lv], levelRank[b.lv]); c != 0 {
			return c
		}
		return cmp.Compare(a.close, b.close)
	})
	ms := make([]Margin, len(list))
	for i := range list {
		ms[i] = list[i].m
	}
	return ms
}

func ptrVal(p *Num) float64 {
	if p == nil {
		return nan
	}
	return float64(*p)
}

func (ps *packState) alarmSnaps() []AlarmSnap {
	out := make([]AlarmSnap, 0, len(ps.alarms))
	for _, a := range ps.alarms {
		s := AlarmSnap{ID: a.id, Since: num(secs(a.since)), Value: numPtr(a.value), Active: a.active, Acked: a.acked}
		if a.fault {
			s.Limit, s.Label, s.Level = "sensor_fault", "Sensor fault", "fault"
			if a.slot >= 0 && int(a.slot) < len(ps.slots) {
				s.Subject = ps.slots[a.slot].Name
			}
			s.Value = nil // an implausible reading is never shown as a value
		} else {
			s.Limit, s.Label, s.Level = a.lim.String(), limitLabels[a.lim], "trip"
			s.Subject = ps.subject(a.lim, a.subj)
		}
		out = append(out, s)
	}
	return out
}

func (ps *packState) valueSnaps(now int64) []ValueSnap {
	out := make([]ValueSnap, len(ps.slots))
	for i := range ps.slots {
		sl := &ps.slots[i]
		vs := &out[i]
		vs.Bind, vs.Unit = sl.Name, sl.Unit
		switch ps.v.Flag[i] {
		case decode.FlagNone:
			vs.State = "missing"
			continue
		case decode.FlagFault:
			vs.State = "fault"
		case decode.FlagInvalid:
			vs.State = "invalid"
		default:
			vs.State = "ok"
			if ps.stale(int32(i), now) {
				vs.State = "stale"
			}
			v := ps.v.V[i]
			vs.Value = numPtr(v)
			switch {
			case sl.Enum != nil:
				if name, ok := sl.Enum[ps.v.Raw[i]]; ok {
					vs.Text = name
				} else {
					vs.Text = strconv.FormatInt(ps.v.Raw[i], 10)
				}
			case sl.Bind.Bool():
				vs.Text = strconv.FormatBool(v != 0)
			}
		}
		vs.Age = numPtr(secs(now - ps.v.T[i]))
	}
	return out
}

func (ps *packState) sourceSnaps(now int64, status []srcStatus) []SourceSnap {
	out := make([]SourceSnap, ps.nsrc)
	for i := range out {
		src := &ps.prof.Sources[i]
		sc := &ps.v.Src[i]
		s := &out[i]
		s.Name, s.Kind = src.Name, src.Kind
		s.State = "unknown"
		if st, ok := ps.statusOf(i, status); ok {
			s.State, s.Reason = st.state.String(), st.reason
		}
		if sc.LastT != 0 {
			s.Age = numPtr(secs(now - sc.LastT))
		}
		s.RateHz = num(ps.rateHz[i])
		s.Messages, s.DecodeErrors, s.Unknown, s.Gaps = sc.Messages, sc.DecodeErrors, sc.Unknown, sc.Gaps
		s.Diagnosis = diagnose(src, sc, ps.errRate[i], now)
	}
	return out
}

// statusOf finds the status of the engine source that feeds profile source p.
func (ps *packState) statusOf(p int, status []srcStatus) (srcStatus, bool) {
	e := p
	if ps.srcMap != nil {
		e = -1
		for i, q := range ps.srcMap {
			if q == p {
				e = i
				break
			}
		}
	}
	if e < 0 || e >= len(status) || !status[e].known {
		return srcStatus{}, false
	}
	return status[e], true
}

// packLevel is the worst of margins and alarms: trip while a trip is
// active; warn for a margin in its warn band, an unacknowledged alarm or an
// active sensor fault; nodata without any cell or value; else ok.
func (ps *packState) packLevel(out *PackSnapshot) string {
	lv := LevelOK
	for _, a := range ps.alarms {
		switch {
		case a.active && !a.fault:
			return "trip"
		case a.active || !a.acked:
			lv = LevelWarn
		}
	}
	for _, m := range out.Margins {
		if m.State == "trip" {
			return "trip"
		}
		if m.State == "warn" {
			lv = LevelWarn
		}
	}
	if lv == LevelOK && out.CellStats.Reporting == 0 {
		return "nodata"
	}
	return lv.String()
}
