package analyze

import "math"

// BurstOptions tune burst detection; zero means the default.
type BurstOptions struct {
	// ThresholdA: |I| above it is a burst (default the larger of half the
	// rated capacity in A and 1.5 × the median |I| while current flows).
	ThresholdA float64
	// MergeS: bursts closer than this are one (default 2 s).
	MergeS float64
	// BeforeS: the "before" values are taken this long before (default 5 s).
	BeforeS float64
	// RecoveryS: the recovery voltage is taken this long after (default 30 s).
	RecoveryS float64
}

func (o BurstOptions) withDefaults(s *Session, deadband float64) BurstOptions {
	if o.ThresholdA <= 0 {
		// |I| while current flows, from a regular sample of the readings
		x := s.Current.V
		stride := max(1, len(x)/medianSample)
		flowing := make([]float64, 0, len(x)/stride+1)
		for i := 0; i < len(x); i += stride {
			if math.Abs(x[i]) > deadband {
				flowing = append(flowing, math.Abs(x[i]))
			}
		}
		o.ThresholdA = math.Max(0.5*s.Pack.CapacityAh, 1.5*median(flowing))
		if math.IsNaN(o.ThresholdA) || o.ThresholdA <= 0 {
			o.ThresholdA = math.Inf(1)
		}
	}
	if o.MergeS <= 0 {
		o.MergeS = 2
	}
	if o.BeforeS <= 0 {
		o.BeforeS = 5
	}
	if o.RecoveryS <= 0 {
		o.RecoveryS = 30
	}
	return o
}

// Burst is one high-current event with what the pack did before, during
// and after it.
type Burst struct {
	From  Num `json:"t_s"`
	To    Num `json:"end_s"`
	PeakA Num `json:"peak_a"` // the largest |I|, with its sign
	MeanA Num `json:"mean_a"`
	Ah    Num `json:"ah"` // |charge| moved during the burst
	// Before: the pack voltage and the lowest cell BeforeS before the burst.
	BeforePackV Num `json:"before_pack_v"`
	BeforeMinV  Num `json:"before_min_cell_v"`
	// During: the lowest pack voltage, the lowest cell voltage and its cell.
	MinPackV Num `json:"min_pack_v"`
	MinCellV Num `json:"min_cell_v"`
	MinCell  int `json:"min_cell"`
	// SagV is the pack's drop (before − lowest during); SagCellV the drop of
	// the cell that went lowest.
	SagV     Num `json:"sag_v"`
	SagCellV Num `json:"sag_cell_v"`
	// TempRise per sensor: the highest reading from the burst's start to
	// RecoveryS after its end minus the reading at its start, K.
	TempRise []Num `json:"temp_rise_c"`
	// Recovery: the pack voltage and the lowest-going cell RecoveryS after
	// the end.
	RecoveryPackV Num `json:"recovery_pack_v"`
	RecoveryCellV Num `json:"recovery_cell_v"`
}

// Bursts finds the high-current events. Zero options take their defaults.
func Bursts(s *Session, ch *Charge, opt BurstOptions) []Burst {
	opt = opt.withDefaults(s, SegmentOptions{}.withDefaults(s.Pack.CapacityAh).DeadbandA)
	tr := &s.Current
	var out []Burst
	n := tr.Len()
	for k := 0; k < n; k++ {
		if math.Abs(tr.V[k]) <= opt.ThresholdA {
			continue
		}
		a, b := k, k
		for m := k + 1; m < n; m++ {
			if math.Abs(tr.V[m]) > opt.ThresholdA {
				if tr.T[m]-tr.T[b] > opt.MergeS {
					break
				}
				b = m
			}
		}
		out = append(out, measureBurst(s, ch, a, b, opt))
		k = b
	}
	return out
}

func measureBurst(s *Session, ch *Charge, a, b int, opt BurstOptions) Burst {
	tr := &s.Current
	from, to := tr.T[a], tr.T[b]
	if b+1 < tr.Len() {
		to = tr.T[b+1]
	}
	bu := Burst{From: Num(from), To: Num(to), MinCell: 0}
	peak, sum := 0.0, 0.0
	for k := a; k <= b; k++ {
		if math.Abs(tr.V[k]) > math.Abs(peak) {
			peak = tr.V[k]
		}
		sum += tr.V[k]
	}
	bu.PeakA, bu.MeanA = Num(peak), Num(sum/float64(b-a+1))
	bu.Ah = Num(ch.ThroughputAt(to) - ch.ThroughputAt(from))
	before := from - opt.BeforeS
	after := to + opt.RecoveryS
	bu.BeforePackV, bu.MinPackV, bu.RecoveryPackV = none, none, none
	if v, ok := s.PackV.At(before); ok {
		bu.BeforePackV = Num(v)
		bu.MinPackV = Num(minIn(&s.PackV, from, to))
		bu.SagV = bu.BeforePackV - bu.MinPackV
		if after <= s.PackV.T[s.PackV.Len()-1] {
			r, _ := s.PackV.At(after)
			bu.RecoveryPackV = Num(r)
		}
	} else {
		bu.SagV = none
	}
	bu.BeforeMinV, bu.MinCellV, bu.SagCellV, bu.RecoveryCellV = none, none, none, none
	lowest, lowCell := math.Inf(1), 0
	beforeMin := math.Inf(1)
	for c := range s.Cells {
		cv := &s.Cells[c]
		if cv.Empty() {
			continue
		}
		if v, ok := cv.At(before); ok {
			beforeMin = math.Min(beforeMin, v)
		}
		if m := minIn(cv, from, to); m < lowest {
			lowest, lowCell = m, c+1
		}
	}
	if lowCell > 0 {
		cv := &s.Cells[lowCell-1]
		bu.MinCellV, bu.MinCell = Num(lowest), lowCell
		bu.BeforeMinV = Num(beforeMin)
		if v, ok := cv.At(before); ok {
			bu.SagCellV = Num(v - lowest)
		}
		if after <= cv.T[cv.Len()-1] {
			r, _ := cv.At(after)
			bu.RecoveryCellV = Num(r)
		}
	}
	for k := range s.Temps {
		tt := &s.Temps[k]
		v0, ok := tt.At(from)
		if !ok {
			bu.TempRise = append(bu.TempRise, none)
			continue
		}
		hi := v0
		i, j := tt.Window(from, after+1e-9)
		for _, v := range tt.V[i:j] {
			hi = math.Max(hi, v)
		}
		bu.TempRise = append(bu.TempRise, Num(hi-v0))
	}
	return bu
}

// minIn is the lowest reading of tr in [a, b], or the value interpolated at
// the middle when no reading falls inside.
func minIn(tr *Trace, a, b float64) float64 {
	i, j := tr.Window(a, b+1e-9)
	if i == j {
		v, _ := tr.At((a + b) / 2)
		return v
	}
	m := math.Inf(1)
	for _, v := range tr.V[i:j] {
		m = math.Min(m, v)
	}
	return m
}
