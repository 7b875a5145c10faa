package analyze

import (
	"math"
	"strconv"
)

// Curve is voltage against charge moved for one run of charge or discharge:
// the pack (Cell 0) or one cell, at a fixed charge step.
type Curve struct {
	Kind  SegmentKind `json:"kind"` // ChargeCC for a charge (with its taper), Discharge
	Cell  int         `json:"cell"` // 0 for the pack
	Label string      `json:"label"`
	// From, To are the run's data times, s.
	From float64 `json:"from_s"`
	To   float64 `json:"to_s"`
	// MeanA is the mean current while current flowed, A (positive
	// charging); CRate is |MeanA| over the rated capacity, 1/h.
	MeanA    float64   `json:"mean_a"`
	CRate    Num       `json:"c_rate"`
	MeanTemp Num       `json:"mean_temp_c"`
	StepAh   float64   `json:"step_ah"`
	Q        []float64 `json:"ah"` // charge moved since the run's start, Ah
	V        []float64 `json:"v"`
	// SteadyOnly: the run's current varied, and the curve keeps only the
	// readings at its usual current (MeanA), 30 s after any other.
	SteadyOnly bool `json:"steady_only,omitempty"`
	// Source names the file the curve came from when several are compared.
	Source string `json:"source,omitempty"`
}

// Run is a charge or a discharge from its start to its end: consecutive
// segments of one direction with the rests and pulses between them. A
// discharge run starts when the pack was last full (FullAt) and ends with
// its last discharge segment before the next charge.
type Run struct {
	Kind     SegmentKind `json:"kind"` // ChargeCC or Discharge
	From     float64     `json:"from_s"`
	To       float64     `json:"to_s"`
	FromFull bool        `json:"from_full"` // starts at the end of a charge taper
	MeanA    float64     `json:"mean_a"`
	MeanTemp Num         `json:"mean_temp_c"`
	Ah       float64     `json:"ah"`
	Wh       Num         `json:"wh"`
	HasTaper bool        `json:"has_taper,omitempty"` // a charge that ended in a constant-voltage taper
	segFirst int
	segLast  int
	ccFrom   float64 // the constant-current part, for ICA
	ccTo     float64
}

// Runs groups segments into charge and discharge runs.
func Runs(s *Session, ch *Charge, segs []Segment) []Run {
	var runs []Run
	for k := 0; k < len(segs); k++ {
		sg := segs[k]
		if sg.Kind != Discharge && sg.Kind != ChargeCC && sg.Kind != ChargeCV {
			continue
		}
		dis := sg.Kind == Discharge
		last := k
		for m := k + 1; m < len(segs); m++ {
			switch segs[m].Kind {
			case Discharge:
				if !dis {
					m = len(segs)
					continue
				}
				last = m
			case ChargeCC, ChargeCV:
				if dis {
					m = len(segs)
					continue
				}
				last = m
			}
		}
		r := Run{Kind: ChargeCC, From: sg.From, To: segs[last].To, segFirst: k, segLast: last,
			ccFrom: sg.From, ccTo: segs[last].To}
		if dis {
			r.Kind = Discharge
			r.From, r.FromFull = FullAt(segs, k)
			r.ccFrom = sg.From
		} else {
			for m := k; m <= last; m++ {
				if segs[m].Kind == ChargeCV {
					r.HasTaper = true
					r.ccTo = math.Min(r.ccTo, segs[m].From)
				}
			}
		}
		fillRun(s, ch, segs, &r)
		runs = append(runs, r)
		k = last
	}
	return runs
}

func fillRun(s *Session, ch *Charge, segs []Segment, r *Run) {
	r.Ah = math.Abs(ch.At(r.To) - ch.At(r.From))
	r.Wh = Num(math.Abs(energyWh(s, r.From, r.To)))
	var q, dt float64
	for m := r.segFirst; m <= r.segLast; m++ {
		if segs[m].Kind == Rest {
			continue
		}
		q += segs[m].MeanA * (segs[m].To - segs[m].From)
		dt += segs[m].To - segs[m].From
	}
	if dt > 0 {
		r.MeanA = q / dt
	}
	r.MeanTemp = Num(s.meanTemp(r.From, r.To))
}

// energyWh integrates V·I over [a, b] by the trapezoid rule on the current
// readings, with the pack voltage interpolated to each reading's time; Wh,
// positive charging. Intervals holding a gap add nothing.
func energyWh(s *Session, a, b float64) float64 {
	tr := &s.Current
	if s.PackV.Empty() {
		return math.NaN()
	}
	i, j := tr.Window(a, b+1e-9)
	vc := cursor{tr: &s.PackV}
	var e float64
	var lastP, lastT float64
	for k := i; k < j; k++ {
		v, _ := vc.at(tr.T[k])
		p := v * tr.V[k]
		if k > i && !s.gapBetween(lastT, tr.T[k]) {
			e += (p + lastP) / 2 * (tr.T[k] - lastT)
		}
		lastP, lastT = p, tr.T[k]
	}
	return e / 3600
}

// RunCurves resamples a run's voltages against the charge moved since its
// start: the pack, and each cell when cells is true.
func RunCurves(s *Session, ch *Charge, r Run, step float64, cells bool) []Curve {
	i, j := s.Current.Window(r.From, r.To+1e-9)
	if j-i < 2 {
		return nil
	}
	moved := make([]float64, j-i)
	q0 := ch.Q[i]
	for k := i; k < j; k++ {
		moved[k-i] = ch.Q[k] - q0
		if r.Kind == Discharge {
			moved[k-i] = -moved[k-i]
		}
	}
	ts := s.Current.T[i:j]
	base := Curve{Kind: r.Kind, From: r.From, To: r.To, MeanA: r.MeanA, MeanTemp: r.MeanTemp, StepAh: step}
	base.CRate = none
	if s.Pack.CapacityAh > 0 {
		base.CRate = Num(math.Abs(r.MeanA) / s.Pack.CapacityAh)
	}
	// a run whose current varies (bursts on a draw) is drawn from the
	// readings at its usual current only, labelled with that current
	ci, cj := s.Current.Window(r.ccFrom, r.ccTo+1e-9)
	steady := cj-ci < 2 || steadyCurrent(s.Current.V[ci:cj], 0.1, 0.9)
	level := 0.0
	if !steady {
		level = median(s.Current.V[ci:cj])
		base.SteadyOnly, base.MeanA = true, level
		if s.Pack.CapacityAh > 0 {
			base.CRate = Num(math.Abs(level) / s.Pack.CapacityAh)
		}
	}
	var out []Curve
	add := func(cell int, tr *Trace, label string) {
		a, b := tr.Window(r.From, r.To+1e-9)
		vt, vv := tr.T[a:b], tr.V[a:b]
		if !steady {
			vt, vv = steadyReadings(s, tr, r.From, r.To, r.ccFrom, level, 30)
		}
		q, v := ResampleByCharge(ts, moved, vt, vv, step)
		if len(q) == 0 {
			return
		}
		c := base
		c.Cell, c.Label, c.Q, c.V = cell, label, q, v
		out = append(out, c)
	}
	add(0, &s.PackV, "pack")
	if cells {
		for k := range s.Cells {
			add(k+1, &s.Cells[k], cellLabel(k+1))
		}
	}
	return out
}

func cellLabel(n int) string { return "cell " + strconv.Itoa(n) }
