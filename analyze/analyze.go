package analyze

import (
	"fmt"
	"math"
	"sort"
)

// Options tune an analysis; the zero value means every default.
type Options struct {
	Segment SegmentOptions
	Step    StepOptions
	ICA     ICAOptions
	Burst   BurstOptions
	// StepAh is the charge step of the curves (default 1 Ah).
	StepAh float64
	// KneeK is the knee factor k (default 3).
	KneeK float64
	// CloseRatio is the pre-charge close ratio (default 0.95).
	CloseRatio float64
	// NoCellCurves leaves the per-cell curves out of the report.
	NoCellCurves bool
}

// Safety is the caution every report carries.
const Safety = "packwatch is a monitor, never the protection. The pack's BMS, its fuses and contactors, and your procedures protect the pack and the people near it; follow local codes and qualified practice. A suggested cutoff is for the BMS to enforce, after you have checked it against the cell maker's limits. Use galvanically isolated adapters and listen mode on vehicle buses; an open contactor is not a de-energised pack; confirm the current's sign with a known load; a fast temperature rise means leave the area."

// ResistanceNote says what the resistances are and are not.
const ResistanceNote = "Resistances come from current steps of normal use, not from the standard procedures: a step from one steady current to another is measured like the two-level DC method of IEC 61960-3, a step from rest like the pulse of the HPPC procedure (DOE/ID-11069), as R = ΔV/ΔI with the current interpolated to each voltage reading's own time; the pulse lengths, rests and states of charge are whatever the session held."

// Report is the result of analysing a session. Numbers are null in JSON
// when they could not be determined.
type Report struct {
	Pack      PackInfo `json:"pack"`
	Source    string   `json:"source,omitempty"`
	StartUnix Num      `json:"start_unix_s"`
	DurationS Num      `json:"duration_s"`
	Messages  int      `json:"messages"`
	Safety    string   `json:"safety"`

	Segments []Segment `json:"segments"`
	Runs     []Run     `json:"runs"`

	// The discharge analysed for capacity and knee, and its charge partner.
	FullAtS             Num    `json:"full_at_s"`
	FullFrom            string `json:"full_from"` // "taper" or "first discharge"
	DischargeCapacityAh Num    `json:"discharge_capacity_ah"`
	DischargeEnergyWh   Num    `json:"discharge_energy_wh"`
	DischargeMeanA      Num    `json:"discharge_mean_a"`
	ChargeCapacityAh    Num    `json:"charge_capacity_ah"`
	ChargeEnergyWh      Num    `json:"charge_energy_wh"`
	CoulombicEff        Num    `json:"coulombic_efficiency"`
	EnergyEff           Num    `json:"energy_efficiency"`

	KneeRule                string `json:"knee_rule"`
	KneeK                   Num    `json:"knee_k"`
	KneeAh                  Num    `json:"knee_ah"`
	KneeVPerCell            Num    `json:"knee_v_per_cell"`
	SuggestedCutoffVPerCell Num    `json:"suggested_cutoff_v_per_cell"`
	SuggestedCutoffPackV    Num    `json:"suggested_cutoff_pack_v"`
	AhBelowCutoff           Num    `json:"ah_below_cutoff"`
	CutoffCRate             Num    `json:"cutoff_c_rate"`
	CutoffTempC             Num    `json:"cutoff_temp_c"`
	CutoffText              string `json:"cutoff_text,omitempty"`
	WeakestCell             *int   `json:"weakest_cell"`
	CellKnees               []Knee `json:"cell_knees,omitempty"`

	ResistanceNote string         `json:"resistance_note"`
	Pulses         []Step         `json:"pulses"`
	Rejected       []Rejected     `json:"pulses_rejected"`
	RejectedCounts map[string]int `json:"pulses_rejected_counts,omitempty"`
	// Resistance sums the accepted steps up: medians per cell and for the pack.
	Resistance ResistanceSummary `json:"resistance"`

	Bursts    []Burst     `json:"bursts"`
	ICA       []ICA       `json:"ica"`
	ICAPeaks  []ICAPeak   `json:"ica_peaks"`
	Imbalance Imbalance   `json:"imbalance"`
	Precharge []Precharge `json:"precharge"`
	Curves    []Curve     `json:"curves"`
	Warnings  []string    `json:"warnings,omitempty"`
}

// ICAPeak is a peak of one run's dQ/dV, flattened for the summary.
type ICAPeak struct {
	Kind   SegmentKind `json:"kind"`
	RunS   Num         `json:"run_from_s"`
	CRate  Num         `json:"c_rate"`
	V      Num         `json:"v"`
	Height Num         `json:"height_ah_per_v"`
}

// maxRejectedListed bounds the rejected steps listed one by one.
const maxRejectedListed = 50

// Analyze runs every analysis over a finished session.
func Analyze(s *Session, opt Options) *Report {
	so := opt.Segment.withDefaults(s.Pack.CapacityAh)
	if opt.StepAh <= 0 {
		opt.StepAh = 1
	}
	if opt.KneeK <= 0 {
		opt.KneeK = DefaultKneeK
	}
	rep := &Report{Pack: s.Pack, StartUnix: Num(float64(s.Start) / 1e9), DurationS: Num(s.Duration()),
		Messages: s.Messages, Safety: Safety, ResistanceNote: ResistanceNote}
	for _, f := range []*Num{&rep.FullAtS, &rep.DischargeCapacityAh, &rep.DischargeEnergyWh, &rep.DischargeMeanA,
		&rep.ChargeCapacityAh, &rep.ChargeEnergyWh, &rep.CoulombicEff, &rep.EnergyEff, &rep.KneeAh,
		&rep.KneeVPerCell, &rep.SuggestedCutoffVPerCell, &rep.SuggestedCutoffPackV, &rep.AhBelowCutoff,
		&rep.CutoffCRate, &rep.CutoffTempC} {
		*f = none
	}
	rep.KneeK = Num(opt.KneeK)
	rep.KneeRule = fmt.Sprintf("the knee is the first point of a constant-current discharge curve, searched from 25 %% of its charge on, where −dV/dQ (a centred difference over 2 %% of the charge) exceeds k = %g times its median over the middle half of the curve", opt.KneeK)
	if s.Current.Empty() {
		rep.Warnings = append(rep.Warnings, "no pack.current readings: nothing to segment")
		rep.Imbalance = CellImbalance(s)
		emptyLists(rep)
		return rep
	}
	if s.Pack.CapacityAh <= 0 {
		rep.Warnings = append(rep.Warnings, "the profile gives no capacity_ah: no C-rates or SOC")
	}
	ch := CountCharge(s)
	segs := Segments(s, ch, opt.Segment)
	rep.Segments = segs
	runs := Runs(s, ch, segs)
	rep.Runs = runs

	// capacity and efficiency
	d := pickDischarge(runs)
	if d >= 0 {
		r := runs[d]
		rep.FullAtS = Num(r.From)
		rep.FullFrom = "first discharge"
		if r.FromFull {
			rep.FullFrom = "taper"
		}
		rep.DischargeCapacityAh, rep.DischargeEnergyWh, rep.DischargeMeanA = Num(r.Ah), Num(r.Wh), Num(r.MeanA)
		if c := pickCharge(runs, d); c >= 0 {
			rep.ChargeCapacityAh, rep.ChargeEnergyWh = Num(runs[c].Ah), Num(runs[c].Wh)
			// a pair means the same two end points: a discharge from full,
			// then the next charge, from where it ended, back to full
			if r.FromFull && runs[c].HasTaper && c > d && !dischargeBetween(runs, d, c) {
				if runs[c].Ah > 0 {
					rep.CoulombicEff = Num(r.Ah / runs[c].Ah)
				}
				if runs[c].Wh > 0 {
					rep.EnergyEff = Num(r.Wh / runs[c].Wh)
				}
			} else {
				rep.Warnings = append(rep.Warnings, "no efficiencies: they need a discharge from full followed by a charge from its end back to full, which this recording does not hold")
			}
		}
		kneeAndCutoff(s, ch, r, opt, rep)
	} else {
		rep.Warnings = append(rep.Warnings, "no discharge long enough to measure capacity")
	}

	// curves
	for _, r := range runs {
		rep.Curves = append(rep.Curves, RunCurves(s, ch, r, opt.StepAh, !opt.NoCellCurves)...)
	}

	// resistance
	soc := socFunc(s, ch, runs)
	rep.Pulses, rep.Rejected = Steps(s, opt.Step, so.DeadbandA, soc)
	rep.Resistance = SummariseSteps(rep.Pulses)
	if len(rep.Rejected) > maxRejectedListed {
		rep.RejectedCounts = map[string]int{}
		for _, r := range rep.Rejected {
			rep.RejectedCounts[reasonKind(r.Reason)]++
		}
		rep.Rejected = rep.Rejected[:maxRejectedListed]
	}

	// ICA on constant-current runs
	for _, r := range runs {
		if r.ccTo-r.ccFrom < 600 {
			continue
		}
		step := math.Max(r.Ah/200, 1e-3)
		res, ok := RunICA(s, ch, r, opt.ICA, step)
		if res.Warning != "" {
			rep.Warnings = append(rep.Warnings, fmt.Sprintf("incremental capacity of the %s at %.0f s: %s", r.Kind, r.From, res.Warning))
		}
		if !ok {
			continue
		}
		rep.ICA = append(rep.ICA, res)
		for _, p := range res.Peaks {
			rep.ICAPeaks = append(rep.ICAPeaks, ICAPeak{Kind: r.Kind, RunS: res.From, CRate: res.CRate, V: p.V, Height: p.Height})
		}
	}

	bo := opt.Burst.withDefaults(s, so.DeadbandA)
	rep.Bursts = Bursts(s, ch, bo)
	rep.Imbalance = CellImbalance(s)
	rep.Precharge = PrechargeEvents(s, opt.CloseRatio)
	for _, p := range rep.Precharge {
		if p.Flag != "" {
			rep.Warnings = append(rep.Warnings, fmt.Sprintf("pre-charge at %.1f s: %s", float64(p.Start), p.Flag))
		}
	}
	rep.Warnings = append(rep.Warnings, rep.Imbalance.Flags...)
	rep.Warnings = append(rep.Warnings, stepFlagSummary(rep.Pulses)...)
	emptyLists(rep)
	return rep
}

// emptyLists makes every list of the report an empty JSON array rather than
// null, so that readers can iterate without a check.
func emptyLists(rep *Report) {
	if rep.Pulses == nil {
		rep.Pulses = []Step{}
	}
	if rep.Rejected == nil {
		rep.Rejected = []Rejected{}
	}
	if rep.Bursts == nil {
		rep.Bursts = []Burst{}
	}
	if rep.ICA == nil {
		rep.ICA = []ICA{}
	}
	if rep.ICAPeaks == nil {
		rep.ICAPeaks = []ICAPeak{}
	}
	if rep.Precharge == nil {
		rep.Precharge = []Precharge{}
	}
	if rep.Segments == nil {
		rep.Segments = []Segment{}
	}
	if rep.Runs == nil {
		rep.Runs = []Run{}
	}
	if rep.Curves == nil {
		rep.Curves = []Curve{}
	}
}

// reasonKind shortens a rejection reason to its first words for counting.
func reasonKind(r string) string {
	for i := 0; i < len(r); i++ {
		if r[i] == ':' {
			return r[:i]
		}
	}
	return r
}

// pickDischarge chooses the discharge run to measure: the largest that
// starts from full, else the largest.
func pickDischarge(runs []Run) int {
	best, bestFull := -1, -1
	for k, r := range runs {
		if r.Kind != Discharge {
			continue
		}
		if best < 0 || r.Ah > runs[best].Ah {
			best = k
		}
		if r.FromFull && (bestFull < 0 || r.Ah > runs[bestFull].Ah) {
			bestFull = k
		}
	}
	if bestFull >= 0 {
		return bestFull
	}
	return best
}

// pickCharge pairs a discharge with the charge that follows it (the
// recharge), else the one before it.
// dischargeBetween reports whether another discharge lies between runs a and b.
func dischargeBetween(runs []Run, a, b int) bool {
	for k := a + 1; k < b; k++ {
		if runs[k].Kind == Discharge {
			return true
		}
	}
	return false
}

func pickCharge(runs []Run, d int) int {
	for k := d + 1; k < len(runs); k++ {
		if runs[k].Kind == ChargeCC {
			return k
		}
	}
	for k := d - 1; k >= 0; k-- {
		if runs[k].Kind == ChargeCC {
			return k
		}
	}
	return -1
}

// socFunc gives the state of charge at a time: the BMS's value when it is
// bound, else counted from the last time the pack was full.
func socFunc(s *Session, ch *Charge, runs []Run) func(float64) float64 {
	if !s.SOC.Empty() {
		return func(t float64) float64 { v, _ := s.SOC.At(t); return v }
	}
	var fulls []float64
	for _, r := range runs {
		if r.Kind == ChargeCC && r.HasTaper {
			fulls = append(fulls, r.To)
		}
		if r.Kind == Discharge && len(fulls) == 0 {
			fulls = append(fulls, r.From) // no charge before: full at the first discharge
		}
	}
	sort.Float64s(fulls)
	return func(t float64) float64 {
		if s.Pack.CapacityAh <= 0 {
			return math.NaN()
		}
		i := sort.SearchFloat64s(fulls, t+1e-9) - 1
		if i < 0 {
			return math.NaN()
		}
		soc := 100 * (1 + (ch.At(t)-ch.At(fulls[i]))/s.Pack.CapacityAh)
		return math.Min(soc, 100)
	}
}

// SessionCurves segments a session and returns the voltage-against-charge
// curves of every charge and discharge run (pack, and cells unless
// opt.NoCellCurves), without the other analyses.
func SessionCurves(s *Session, opt Options) []Curve {
	if opt.StepAh <= 0 {
		opt.StepAh = 1
	}
	if s.Current.Empty() {
		return nil
	}
	ch := CountCharge(s)
	runs := Runs(s, ch, Segments(s, ch, opt.Segment))
	var out []Curve
	for _, r := range runs {
		out = append(out, RunCurves(s, ch, r, opt.StepAh, !opt.NoCellCurves)...)
	}
	return out
}

// stepFlagSummary turns the steps' flags into one note per cell or joint:
// the first flag's words and how many of the steps raised it.
func stepFlagSummary(steps []Step) []string {
	type agg struct {
		first string
		n     int
	}
	var order []string
	byKey := map[string]*agg{}
	for _, p := range steps {
		for _, f := range p.Flags {
			key := reasonKind(f)
			a := byKey[key]
			if a == nil {
				a = &agg{first: fmt.Sprintf("%s (first at %.1f s)", f, float64(p.T))}
				byKey[key] = a
				order = append(order, key)
			}
			a.n++
		}
	}
	var out []string
	for _, k := range order {
		a := byKey[k]
		out = append(out, fmt.Sprintf("resistance: %s; at %d of %d steps", a.first, a.n, len(steps)))
	}
	return out
}
