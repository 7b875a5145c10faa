package check

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"packwatch/pack"
)

// Sample is one snapshot of the checked pack at data time T (ns since the
// Unix epoch).
type Sample struct {
	T    int64
	Pack pack.PackSnapshot
}

// Window is what a check looked at: the pack's snapshots over [From, To]
// of data time (ns since the Unix epoch), in time order; the last sample is
// the state at the end. Start is the pack at From (for the message counters
// of the rate rule); nil means nothing had arrived yet.
type Window struct {
	From, To int64
	Start    *pack.PackSnapshot
	Samples  []Sample
}

// Seconds is the window's length in seconds.
func (w *Window) Seconds() float64 { return float64(w.To-w.From) / 1e9 }

// soc allowance: a state of charge the engine marks uncertain (estimated from
// the rest-voltage table, or counted across a gap) must clear the minimum by
// this many percentage points (our choice: the rest table reads a few
// percent off when the pack has not rested long).
const uncertainSOCPct = 5.0

// Evaluate applies every automatic rule to a window: a pure function of its
// inputs. The rules come in a fixed order (Sorted puts failing ones first).
// The charge window rule appears only when the pack was charging in the
// window. Manual items are not included (see ManualRules).
func Evaluate(w Window, s Settings) []RuleResult {
	var out []RuleResult
	out = append(out, ruleReporting(w))
	lo, hi := ruleCellMargins(w, s)
	out = append(out, lo, hi, ruleSpread(w, s), ruleSOC(w, s))
	out = append(out, ruleTemperature(w, s, false))
	if charging(w) {
		out = append(out, ruleTemperature(w, s, true))
	}
	out = append(out, ruleRestCurrent(w, s), ruleFaultFlags(w), ruleContactor(w), ruleTrips(w))
	out = append(out, ruleRates(w, s)...)
	return out
}

func fresh(state string) bool { return state == "ok" || state == "warn" || state == "trip" }

func last(w *Window) *pack.PackSnapshot {
	if len(w.Samples) == 0 {
		return nil
	}
	return &w.Samples[len(w.Samples)-1].Pack
}

// at says when, relative to the window's start.
func at(w *Window, t int64) string {
	return fmt.Sprintf("at +%.0f s", math.Max(0, float64(t-w.From)/1e9))
}

func fmtV(v float64) string { return strconv.FormatFloat(v, 'f', 3, 64) + " V" }
func fmtC(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) + " °C" }
func fmtA(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) + " A" }
func fmtPct(v float64) string {
	return strconv.FormatFloat(v, 'f', 0, 64) + " %"
}
func fmtHz(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) + " Hz" }

// noSamples is the result of a rule when the window holds no sample.
func noSamples(id, label string) RuleResult {
	return RuleResult{ID: id, Label: label, Status: NoData, Measured: "nothing", Reason: "no data arrived during the check"}
}

// ruleReporting: every cell and temperature sensor has a fresh reading at
// the end, none turned stale, missing or faulty after it had reported, and
// none showed a sensor fault.
func ruleReporting(w Window) RuleResult {
	const id, label = "reporting", "Cells and sensors reporting"
	l := last(&w)
	if l == nil {
		return noSamples(id, label)
	}
	r := RuleResult{ID: id, Label: label, Required: "every cell and sensor fresh for the whole check"}
	var problems []string
	seen := map[string]bool{}
	note := func(key, text string) {
		if !seen[key] {
			seen[key] = true
			problems = append(problems, text)
		}
	}
	nc, nt := len(l.Cells), len(l.Temps)
	cellFresh := make([]bool, nc)
	tempFresh := make([]bool, nt)
	anyFresh := false
	for _, sm := range w.Samples {
		for i, c := range sm.Pack.Cells {
			if i >= nc {
				break
			}
			switch {
			case fresh(c.State):
				cellFresh[i], anyFresh = true, true
			case c.State == "fault":
				key := "cell " + strconv.Itoa(c.N)
				note(key, key+" reading implausible (sensor fault) "+at(&w, sm.T))
			case cellFresh[i]:
				key := "cell " + strconv.Itoa(c.N)
				note(key, key+" went "+c.State+" "+at(&w, sm.T))
			}
		}
		for i, t := range sm.Pack.Temps {
			if i >= nt {
				break
			}
			switch {
			case fresh(t.State):
				tempFresh[i], anyFresh = true, true
			case t.State == "fault":
				key := "sensor " + strconv.Itoa(t.N)
				note(key, key+" reading implausible (sensor fault) "+at(&w, sm.T))
			case tempFresh[i]:
				key := "sensor " + strconv.Itoa(t.N)
				note(key, key+" went "+t.State+" "+at(&w, sm.T))
			}
		}
	}
	okCells, okTemps := 0, 0
	// Readings not fresh at the end, grouped by what is wrong.
	type group struct{ kind, state string }
	groups := map[group][]string{}
	var order []group
	add := func(g group, n int) {
		if _, ok := groups[g]; !ok {
			order = append(order, g)
		}
		groups[g] = append(groups[g], strconv.Itoa(n))
	}
	for _, c := range l.Cells {
		if fresh(c.State) {
			okCells++
		} else if !seen["cell "+strconv.Itoa(c.N)] {
			add(group{"cell", c.State}, c.N)
		}
	}
	for _, t := range l.Temps {
		if fresh(t.State) {
			okTemps++
		} else if !seen["sensor "+strconv.Itoa(t.N)] {
			add(group{"sensor", t.State}, t.N)
		}
	}
	for _, g := range order {
		ns := groups[g]
		who := g.kind + " " + ns[0]
		if len(ns) > 1 {
			who = g.kind + "s " + strings.Join(ns, ", ")
		}
		problems = append(problems, who+" "+stateWords(g.state, len(ns) > 1))
	}
	r.Measured = fmt.Sprintf("%d of %d cells, %d of %d sensors fresh", okCells, nc, okTemps, nt)
	r.Value = nump(float64(okCells + okTemps))
	r.Limit = nump(float64(nc + nt))
	switch {
	case !anyFresh:
		r.Status, r.Reason = NoData, "no cell or sensor reported during the check"
	case len(problems) > 0:
		r.Status, r.Reason = Fail, strings.Join(problems, "; ")
	default:
		r.Status, r.Reason = Pass, "every cell and sensor reported and stayed fresh"
	}
	return r
}

func stateWords(state string, plural bool) string {
	switch state {
	case "stale":
		return "stale at the end (no recent reading)"
	case "missing":
		if plural {
			return "have not reported (no message, an invalid reading, or no binding in the profile)"
		}
		return "has not reported (no message, an invalid reading, or no binding in the profile)"
	case "fault":
		return "reading implausible (sensor fault)"
	}
	return state
}

// cellExtremes finds the lowest and highest fresh cell over the window.
type extreme struct {
	v    float64
	n    int
	t    int64
	have bool
}

func (e *extreme) low(v float64, n int, t int64) {
	if !e.have || v < e.v {
		*e = extreme{v, n, t, true}
	}
}

func (e *extreme) high(v float64, n int, t int64) {
	if !e.have || v > e.v {
		*e = extreme{v, n, t, true}
	}
}

// notFreshCells lists cells without a fresh reading at the end.
func notFreshCells(l *pack.PackSnapshot) []string {
	var out []string
	for _, c := range l.Cells {
		if !fresh(c.State) || c.V == nil {
			out = append(out, strconv.Itoa(c.N))
		}
	}
	return out
}

func ruleCellMargins(w Window, s Settings) (lo, hi RuleResult) {
	l := last(&w)
	if l == nil {
		return noSamples("cell_low_margin", "Margin to cell_low_v"), noSamples("cell_high_margin", "Margin to cell_high_v")
	}
	var mn, mx extreme
	for _, sm := range w.Samples {
		for _, c := range sm.Pack.Cells {
			if c.V == nil || !fresh(c.State) {
				continue
			}
			mn.low(float64(*c.V), c.N, sm.T)
			mx.high(float64(*c.V), c.N, sm.T)
		}
	}
	missing := notFreshCells(l)
	req := s.MinCellMarginV
	mk := func(id, label string, e extreme, margin float64, bound string) RuleResult {
		r := RuleResult{ID: id, Label: label, Unit: "V", Default: req.Default,
			Required: "≥ " + fmtV(req.Value) + " " + bound, Limit: nump(req.Value)}
		if !e.have {
			r.Status, r.Measured, r.Reason = NoData, "no fresh cell", "no cell voltage arrived during the check"
			return r
		}
		r.Value = nump(margin)
		r.Subject = "cell " + strconv.Itoa(e.n)
		r.Measured = fmt.Sprintf("%s (cell %d at %s)", fmtV(margin), e.n, fmtV(e.v))
		switch {
		case margin < req.Value:
			r.Status = Fail
			r.Reason = fmt.Sprintf("cell %d at %s %s is only %s %s; needs %s", e.n, fmtV(e.v), at(&w, e.t), fmtV(margin), bound, fmtV(req.Value))
		case len(missing) > 0:
			r.Status = NoData
			r.Reason = fmt.Sprintf("cell(s) %s not reporting at the end; the others keep %s", strings.Join(missing, ", "), fmtV(margin))
		default:
			r.Status = Pass
			r.Reason = fmt.Sprintf("every cell stayed at least %s %s", fmtV(margin), bound)
		}
		return r
	}
	lo = mk("cell_low_margin", "Margin to cell_low_v", mn, mn.v-s.CellLowV, "above cell_low_v "+fmtV(s.CellLowV))
	hi = mk("cell_high_margin", "Margin to cell_high_v", mx, s.CellHighV-mx.v, "below cell_high_v "+fmtV(s.CellHighV))

	return lo, hi
}

func ruleSpread(w Window, s Settings) RuleResult {
	const id, label = "spread", "Cell spread"
	l := last(&w)
	if l == nil {
		return noSamples(id, label)
	}
	req := s.MaxSpreadV
	r := RuleResult{ID: id, Label: label, Unit: "V", Default: req.Default, Required: "≤ " + fmtV(req.Value), Limit: nump(req.Value)}
	worst, have := 0.0, false
	var wt int64
	var wlo, whi int
	for _, sm := range w.Samples {
		var mn, mx extreme
		n := 0
		for _, c := range sm.Pack.Cells {
			if c.V == nil || !fresh(c.State) {
				continue
			}
			n++
			mn.low(float64(*c.V), c.N, sm.T)
			mx.high(float64(*c.V), c.N, sm.T)
		}
		if n < 2 {
			continue
		}
		if sp := mx.v - mn.v; !have || sp > worst {
			worst, have, wt, wlo, whi = sp, true, sm.T, mn.n, mx.n
		}
	}
	if !have {
		r.Status, r.Measured, r.Reason = NoData, "no fresh cells", "fewer than two cell voltages arrived during the check"
		return r
	}
	r.Value = nump(worst)
	r.Measured = fmt.Sprintf("%s (cell %d to cell %d)", fmtV(worst), wlo, whi)
	if wlo == whi {
		r.Measured = fmtV(worst) + " (all cells read alike)"
	}
	missing := notFreshCells(l)
	switch {
	case worst > req.Value:
		r.Status = Fail
		r.Reason = fmt.Sprintf("highest cell %d minus lowest cell %d was %s %s; at most %s allowed: a weak or unbalanced cell", whi, wlo, fmtV(worst), at(&w, wt), fmtV(req.Value))
	case len(missing) > 0:
		r.Status = NoData
		r.Reason = fmt.Sprintf("cell(s) %s not reporting at the end; the spread of the others is %s", strings.Join(missing, ", "), fmtV(worst))
	default:
		r.Status, r.Reason = Pass, "the cells stayed within "+fmtV(worst)+" of each other"
	}
	return r
}

func ruleSOC(w Window, s Settings) RuleResult {
	const id, label = "soc", "State of charge"
	l := last(&w)
	if l == nil {
		return noSamples(id, label)
	}
	req := s.MinSOCPct
	r := RuleResult{ID: id, Label: label, Unit: "%", Default: req.Default, Required: "≥ " + fmtPct(req.Value), Limit: nump(req.Value)}
	if l.SOC.Pct == nil || l.SOC.Source == "none" || l.SOC.Source == "" {
		r.Status, r.Measured = NoData, "unknown"
		r.Reason = "no state of charge at the end of the check (pack.soc not reporting, and not enough cell voltages to estimate it)"
		return r
	}
	low, src := math.Inf(1), ""
	var lt int64
	for _, sm := range w.Samples {
		so := sm.Pack.SOC
		if so.Pct == nil || so.Source == "none" || so.Source == "" {
			continue
		}
		if v := float64(*so.Pct); v < low {
			low, src, lt = v, so.Source, sm.T
		}
	}
	r.Value = nump(low)
	need := req.Value
	how := map[string]string{"bms": "reported by the BMS", "counted": "counted", "uncertain": "estimated, uncertain"}[src]
	r.Measured = fmt.Sprintf("%s (%s)", fmtPct(low), how)
	if src == "uncertain" {
		need += uncertainSOCPct
	}
	switch {
	case low < req.Value:
		r.Status = Fail
		r.Reason = fmt.Sprintf("state of charge %s %s is below the %s required", fmtPct(low), at(&w, lt), fmtPct(req.Value))
	case low < need:
		r.Status = Fail
		r.Reason = fmt.Sprintf("the state of charge is only estimated (from rest voltage or counted across a gap); an estimate must clear %s by %.0f points, %s does not", fmtPct(req.Value), uncertainSOCPct, fmtPct(low))
	default:
		r.Status = Pass
		r.Reason = fmt.Sprintf("state of charge stayed at or above %s", fmtPct(low))
		if src == "uncertain" {
			r.Reason += fmt.Sprintf(", an estimate clearing the minimum by at least %.0f points", uncertainSOCPct)
		}
	}
	return r
}

func charging(w Window) bool {
	for _, sm := range w.Samples {
		if sm.Pack.CurrentWord == "charging" {
			return true
		}
	}
	return false
}

// ruleTemperature checks every non-ambient sensor against the discharge
// window over the whole check, or (chargeWin) against the charge window over
// the samples where the pack was charging.
func ruleTemperature(w Window, s Settings, chargeWin bool) RuleResult {
	id, label := "temperature", "Temperature window"
	loS, hiS := s.TempLowC, s.TempHighC
	if chargeWin {
		id, label = "charge_temperature", "Charge temperature window"
		loS, hiS = s.ChargeTempLowC, s.ChargeTempHighC
	}
	l := last(&w)
	if l == nil {
		return noSamples(id, label)
	}
	r := RuleResult{ID: id, Label: label, Unit: "°C", Default: loS.Default || hiS.Default,
		Required: fmtC(loS.Value) + " … " + fmtC(hiS.Value)}
	var mn, mx extreme
	for _, sm := range w.Samples {
		if chargeWin && sm.Pack.CurrentWord != "charging" {
			continue
		}
		for _, t := range sm.Pack.Temps {
			if t.C == nil || !fresh(t.State) || strings.EqualFold(t.Role, "ambient") {
				continue
			}
			mn.low(float64(*t.C), t.N, sm.T)
			mx.high(float64(*t.C), t.N, sm.T)
		}
	}
	var missing []string
	sensors := 0
	for _, t := range l.Temps {
		if strings.EqualFold(t.Role, "ambient") {
			continue
		}
		sensors++
		if t.C == nil || !fresh(t.State) {
			missing = append(missing, strconv.Itoa(t.N))
		}
	}
	if sensors == 0 {
		r.Status, r.Measured = NoData, "no sensor"
		r.Reason = "the profile has no pack temperature sensor (ambient sensors do not count): the pack's temperature is unknown"
		return r
	}
	if !mn.have {
		r.Status, r.Measured, r.Reason = NoData, "no fresh sensor", "no pack temperature arrived during the check"
		return r
	}
	r.Measured = fmt.Sprintf("%s (sensor %d) … %s (sensor %d)", fmtC(mn.v), mn.n, fmtC(mx.v), mx.n)
	var bad []string
	if mn.v < loS.Value {
		bad = append(bad, fmt.Sprintf("sensor %d at %s %s is below %s", mn.n, fmtC(mn.v), at(&w, mn.t), fmtC(loS.Value)))
		r.Value, r.Limit, r.Subject = nump(mn.v), nump(loS.Value), "sensor "+strconv.Itoa(mn.n)
	}
	if mx.v > hiS.Value {
		bad = append(bad, fmt.Sprintf("sensor %d at %s %s is above %s", mx.n, fmtC(mx.v), at(&w, mx.t), fmtC(hiS.Value)))
		r.Value, r.Limit, r.Subject = nump(mx.v), nump(hiS.Value), "sensor "+strconv.Itoa(mx.n)
	}
	if r.Value == nil {
		r.Value, r.Limit, r.Subject = nump(mx.v), nump(hiS.Value), "sensor "+strconv.Itoa(mx.n)
	}
	what := "the pack's temperatures"
	if chargeWin {
		what = "while charging, the pack's temperatures"
	}
	switch {
	case len(bad) > 0:
		r.Status, r.Reason = Fail, strings.Join(bad, "; ")
	case len(missing) > 0:
		r.Status = NoData
		r.Reason = fmt.Sprintf("sensor(s) %s not reporting at the end; the others stay inside", strings.Join(missing, ", "))
	default:
		r.Status, r.Reason = Pass, what+" stayed inside the window"
	}
	return r
}

func hasBind(l *pack.PackSnapshot, bind string) (pack.ValueSnap, bool) {
	for _, v := range l.Values {
		if v.Bind == bind {
			return v, true
		}
	}
	return pack.ValueSnap{}, false
}

func ruleRestCurrent(w Window, s Settings) RuleResult {
	const id, label = "rest_current", "Current at rest"
	l := last(&w)
	if l == nil {
		return noSamples(id, label)
	}
	req := s.MaxRestCurrentA
	r := RuleResult{ID: id, Label: label, Unit: "A", Default: req.Default, Required: "|I| ≤ " + fmtA(req.Value), Limit: nump(req.Value)}
	if l.Current == nil {
		r.Status, r.Measured = NoData, "unknown"
		if _, bound := hasBind(l, "pack.current"); !bound {
			r.Reason = "the profile does not bind pack.current: whether the pack is at rest is unknown"
		} else {
			r.Reason = "no fresh pack current at the end of the check"
		}
		return r
	}
	var e extreme
	for _, sm := range w.Samples {
		if sm.Pack.Current != nil {
			e.high(math.Abs(float64(*sm.Pack.Current)), 0, sm.T)
			if e.t == sm.T {
				e.n = int(math.Copysign(1, float64(*sm.Pack.Current)))
			}
		}
	}
	r.Value = nump(e.v)
	r.Measured = "|I| up to " + fmtA(e.v)
	if e.v > req.Value {
		dir := "discharging"
		if e.n > 0 {
			dir = "charging"
		}
		r.Status = Fail
		r.Reason = fmt.Sprintf("the pack was %s at %s %s; at rest it must stay within %s (off the charger, load off)", dir, fmtA(e.v), at(&w, e.t), fmtA(req.Value))
		return r
	}
	r.Status, r.Reason = Pass, "the pack stayed at rest"
	return r
}

// ruleFaultFlags: no fault.* binding true and bms.state never a fault state,
// at any sample; every flag fresh at the end.
func ruleFaultFlags(w Window) RuleResult {
	const id, label = "fault_flags", "BMS fault flags"
	l := last(&w)
	if l == nil {
		return noSamples(id, label)
	}
	r := RuleResult{ID: id, Label: label, Required: "no fault flag set, BMS state not a fault"}
	isFlag := func(b string) bool { return strings.HasPrefix(b, "fault.") || b == "bms.state" }
	var flags []string
	for _, v := range l.Values {
		if isFlag(v.Bind) {
			flags = append(flags, v.Bind)
		}
	}
	if len(flags) == 0 {
		r.Status, r.Measured = NotChecked, "nothing bound"
		r.Reason = "the profile binds no fault.* flag and no bms.state: the check cannot see the BMS's own faults"
		return r
	}
	var set []string
	seen := map[string]bool{}
	for _, sm := range w.Samples {
		for _, v := range sm.Pack.Values {
			if !isFlag(v.Bind) || v.State != "ok" && v.State != "stale" || seen[v.Bind] {
				continue
			}
			on := false
			if v.Bind == "bms.state" {
				on = strings.Contains(strings.ToLower(v.Text), "fault")
			} else {
				on = v.Value != nil && *v.Value != 0
			}
			if on {
				seen[v.Bind] = true
				desc := v.Bind
				if v.Bind == "bms.state" {
					desc = "bms.state " + strconv.Quote(v.Text)
				}
				set = append(set, desc+" "+at(&w, sm.T))
			}
		}
	}
	var silent []string
	for _, v := range l.Values {
		if isFlag(v.Bind) && v.State != "ok" {
			silent = append(silent, v.Bind+" "+v.State)
		}
	}
	r.Value, r.Limit = nump(float64(len(set))), nump(0)
	switch {
	case len(set) > 0:
		r.Status, r.Measured = Fail, fmt.Sprintf("%d set", len(set))
		r.Reason = "the BMS reports a fault: " + strings.Join(set, "; ")
	case len(silent) > 0:
		r.Status, r.Measured = NoData, "not all fresh"
		r.Reason = "cannot confirm that no fault is set: " + strings.Join(silent, "; ")
	default:
		r.Status, r.Measured = Pass, fmt.Sprintf("none set (%d watched)", len(flags))
		r.Reason = "no fault flag was set during the check: " + strings.Join(flags, ", ")
	}
	return r
}

// ruleContactor: where both contactor.main and contactor.main.command are
// bound, the feedback agrees with the command at the end and never
// disagrees on two samples in a row (one sample may catch a transition).
func ruleContactor(w Window) RuleResult {
	const id, label = "contactor", "Main contactor feedback"
	l := last(&w)
	if l == nil {
		return noSamples(id, label)
	}
	r := RuleResult{ID: id, Label: label, Required: "feedback equals command"}
	_, fb := hasBind(l, "contactor.main")
	_, cmd := hasBind(l, "contactor.main.command")
	if !fb || !cmd {
		r.Status, r.Measured = NotChecked, "not both bound"
		r.Reason = "the profile does not bind both contactor.main and contactor.main.command"
		return r
	}
	run, worst := 0, 0
	var wt int64
	var wf, wc bool
	lastMismatch := false
	for _, sm := range w.Samples {
		f, okF := hasBind(&sm.Pack, "contactor.main")
		c, okC := hasBind(&sm.Pack, "contactor.main.command")
		if !okF || !okC || f.State != "ok" || c.State != "ok" || f.Value == nil || c.Value == nil {
			run, lastMismatch = 0, false
			continue
		}
		fOn, cOn := *f.Value != 0, *c.Value != 0
		if fOn != cOn {
			run++
			lastMismatch = true
			if run > worst {
				worst, wt, wf, wc = run, sm.T, fOn, cOn
			}
		} else {
			run, lastMismatch = 0, false
		}
	}
	f, _ := hasBind(l, "contactor.main")
	c, _ := hasBind(l, "contactor.main.command")
	word := func(on bool) string {
		if on {
			return "closed"
		}
		return "open"
	}
	switch {
	case worst >= 2 || lastMismatch:
		r.Status, r.Measured = Fail, fmt.Sprintf("feedback %s, command %s", word(wf), word(wc))
		r.Reason = fmt.Sprintf("the main contactor reads %s while commanded %s %s: stuck or miswired", word(wf), word(wc), at(&w, wt))
	case f.State != "ok" || c.State != "ok" || f.Value == nil || c.Value == nil:
		r.Status, r.Measured = NoData, "not fresh"
		r.Reason = fmt.Sprintf("contactor.main is %s and contactor.main.command is %s at the end", f.State, c.State)
	default:
		on := *f.Value != 0
		r.Status, r.Measured = Pass, "both "+word(on)
		r.Reason = "the feedback followed the command"
	}
	return r
}

// ruleTrips: no packwatch trip active at the end or raised in the window.
func ruleTrips(w Window) RuleResult {
	const id, label = "trips", "packwatch trips"
	l := last(&w)
	if l == nil {
		return noSamples(id, label)
	}
	r := RuleResult{ID: id, Label: label, Required: "no trip active or raised during the check"}
	from := float64(w.From) / 1e9
	var trips []string
	for _, a := range l.Alarms {
		if a.Level != "trip" || !(a.Active || float64(a.Since) >= from) {
			continue
		}
		t := a.Label
		if a.Subject != "" {
			t += " (" + a.Subject + ")"
		}
		if a.Active {
			t += ", active"
		}
		trips = append(trips, t)
	}
	r.Value, r.Limit = nump(float64(len(trips))), nump(0)
	if len(trips) > 0 {
		r.Status, r.Measured = Fail, fmt.Sprintf("%d trip(s)", len(trips))
		r.Reason = "a limit of the profile tripped: " + strings.Join(trips, "; ")
		return r
	}
	r.Status, r.Measured, r.Reason = Pass, "none", "no limit tripped during the check"
	return r
}

func ruleRates(w Window, s Settings) []RuleResult {
	var out []RuleResult
	l := last(&w)
	for _, sr := range s.Rates {
		id, label := "rate."+sr.Source, "Message rate of "+sr.Source
		if l == nil {
			out = append(out, noSamples(id, label))
			continue
		}
		r := RuleResult{ID: id, Label: label, Unit: "Hz", Subject: sr.Source, Default: sr.Min.Default,
			Required: "≥ " + fmtHz(sr.Min.Value), Limit: nump(sr.Min.Value)}
		var end, start *pack.SourceSnap
		for i := range l.Sources {
			if l.Sources[i].Name == sr.Source {
				end = &l.Sources[i]
			}
		}
		if w.Start != nil {
			for i := range w.Start.Sources {
				if w.Start.Sources[i].Name == sr.Source {
					start = &w.Start.Sources[i]
				}
			}
		}
		secs := w.Seconds()
		if end == nil || secs < 1 {
			r.Status, r.Measured = NoData, "unknown"
			r.Reason = "the check was shorter than one second"
			if end == nil {
				r.Reason = "no counters for this source"
			}
			out = append(out, r)
			continue
		}
		n := end.Messages
		if start != nil && start.Messages <= n {
			n -= start.Messages
		}
		rate := float64(n) / secs
		r.Value = nump(rate)
		r.Measured = fmt.Sprintf("%s (%d messages in %.1f s)", fmtHz(rate), n, secs)
		if rate < sr.Min.Value {
			r.Status = Fail
			why := fmt.Sprintf("source %s sent %d messages in %.1f s", sr.Source, n, secs)
			if n == 0 {
				why = fmt.Sprintf("source %s sent nothing during the check", sr.Source)
			}
			if end.Diagnosis != "" {
				why += " (" + end.Diagnosis + ")"
			} else if end.Reason != "" {
				why += " (" + end.State + ": " + end.Reason + ")"
			}
			r.Reason = why
		} else {
			r.Status, r.Reason = Pass, "the source kept its rate"
		}
		out = append(out, r)
	}
	return out
}
