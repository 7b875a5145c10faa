package analyze

import (
	"math"
	"sort"
)

// SegmentKind says what the pack was doing.
type SegmentKind string

// Segment kinds.
const (
	Rest      SegmentKind = "rest"
	ChargeCC  SegmentKind = "charge_cc" // constant current part of a charge
	ChargeCV  SegmentKind = "charge_cv" // constant voltage part: the taper
	Discharge SegmentKind = "discharge"
	Pulse     SegmentKind = "pulse" // a charge or discharge shorter than PulseMaxS
)

// Segment is a stretch of the session with one kind of current.
type Segment struct {
	Kind     SegmentKind `json:"kind"`
	From     float64     `json:"from_s"`
	To       float64     `json:"to_s"`
	MeanA    float64     `json:"mean_a"`      // mean current, A (positive charging)
	Ah       float64     `json:"ah"`          // |charge| moved, Ah
	MeanTemp Num         `json:"mean_temp_c"` // NaN when no sensor reported
	// first and last indexes into Session.Current
	i, j int
}

// SegmentOptions tune segmentation; the zero value means the defaults.
type SegmentOptions struct {
	// DeadbandA: |I| at or below it is rest (default 2 % of the rated
	// capacity in A, at least 0.1 A).
	DeadbandA float64
	// MinDurationS: a rest shorter than this between two stretches of the
	// same direction does not split them (default 10 s).
	MinDurationS float64
	// PulseMaxS: a charge or discharge shorter than this is a pulse
	// (default 60 s).
	PulseMaxS float64
	// TaperFrac: a charge's constant-voltage part starts where the current
	// last stood at or above this fraction of its constant-current level
	// (default 0.95).
	TaperFrac float64
}

func (o SegmentOptions) withDefaults(capAh float64) SegmentOptions {
	if o.DeadbandA <= 0 {
		o.DeadbandA = math.Max(0.1, 0.02*capAh)
	}
	if o.MinDurationS <= 0 {
		o.MinDurationS = 10
	}
	if o.PulseMaxS <= 0 {
		o.PulseMaxS = 60
	}
	if o.TaperFrac <= 0 || o.TaperFrac >= 1 {
		o.TaperFrac = 0.95
	}
	return o
}

// direction of one current reading: −1 discharge, 0 rest, +1 charge.
func direction(i, deadband float64) int {
	switch {
	case i > deadband:
		return 1
	case i < -deadband:
		return -1
	}
	return 0
}

// run is a stretch of readings [i, j] with one direction.
type run struct {
	dir  int
	i, j int
}

// Segments splits the session by its current. Gaps split segments too.
func Segments(s *Session, ch *Charge, opt SegmentOptions) []Segment {
	opt = opt.withDefaults(s.Pack.CapacityAh)
	tr := &s.Current
	n := tr.Len()
	if n == 0 {
		return nil
	}
	// 1. runs of one direction
	var runs []run
	for k := 0; k < n; k++ {
		d := direction(tr.V[k], opt.DeadbandA)
		if len(runs) > 0 {
			last := &runs[len(runs)-1]
			if last.dir == d && !s.gapBetween(tr.T[k-1], tr.T[k]) {
				last.j = k
				continue
			}
		}
		runs = append(runs, run{dir: d, i: k, j: k})
	}
	// 2. a short rest between two runs of the same direction joins them;
	// so does a short blip of the other direction inside a long run.
	dur := func(r run) float64 {
		end := r.j + 1
		if end >= n {
			end = n - 1
		}
		return tr.T[end] - tr.T[r.i]
	}
	for changed := true; changed; {
		changed = false
		for k := 1; k+1 < len(runs); k++ {
			a, b, c := runs[k-1], runs[k], runs[k+1]
			if a.dir == c.dir && a.dir != 0 && b.dir == 0 && dur(b) < opt.MinDurationS &&
				!s.gapBetween(tr.T[a.j], tr.T[c.i]) {
				runs[k-1].j = c.j
				runs = append(runs[:k], runs[k+2:]...)
				changed = true
				break
			}
		}
	}
	// 3. segments
	var segs []Segment
	for _, r := range runs {
		seg := makeSegment(s, ch, r, opt)
		if r.dir > 0 && seg.Kind == ChargeCC {
			segs = append(segs, splitCV(s, ch, seg, opt)...)
			continue
		}
		segs = append(segs, seg)
	}
	return segs
}

func makeSegment(s *Session, ch *Charge, r run, opt SegmentOptions) Segment {
	tr := &s.Current
	n := tr.Len()
	to := tr.T[r.j]
	if r.j+1 < n && !s.gapBetween(tr.T[r.j], tr.T[r.j+1]) {
		to = tr.T[r.j+1] // the segment lasts until the next reading
	}
	seg := Segment{From: tr.T[r.i], To: to, i: r.i, j: r.j}
	switch {
	case r.dir == 0:
		seg.Kind = Rest
	case to-seg.From < opt.PulseMaxS:
		seg.Kind = Pulse
	case r.dir > 0:
		seg.Kind = ChargeCC
	default:
		seg.Kind = Discharge
	}
	fillStats(s, ch, &seg)
	return seg
}

func fillStats(s *Session, ch *Charge, seg *Segment) {
	tr := &s.Current
	if seg.To > seg.From {
		q := ch.At(seg.To) - ch.At(seg.From)
		seg.MeanA = q * 3600 / (seg.To - seg.From)
		seg.Ah = ch.ThroughputAt(seg.To) - ch.ThroughputAt(seg.From)
	} else {
		seg.MeanA = tr.V[seg.i]
	}
	seg.MeanTemp = Num(s.meanTemp(seg.From, seg.To))
}

// splitCV splits a charge into its constant-current part and its taper.
// The CC level is the 90th percentile of the charge's current; the taper
// starts after the last reading at or above TaperFrac of it, provided the
// current then falls below half the CC level (a real taper, not noise).
func splitCV(s *Session, ch *Charge, seg Segment, opt SegmentOptions) []Segment {
	tr := &s.Current
	icc := percentile(tr.V[seg.i:seg.j+1], 0.9)
	last := -1
	for k := seg.j; k >= seg.i; k-- {
		if tr.V[k] >= opt.TaperFrac*icc {
			last = k
			break
		}
	}
	if last < 0 || last >= seg.j {
		return []Segment{seg}
	}
	minAfter := math.Inf(1)
	for k := last + 1; k <= seg.j; k++ {
		minAfter = math.Min(minAfter, tr.V[k])
	}
	if minAfter > 0.5*icc {
		return []Segment{seg}
	}
	cc := Segment{Kind: ChargeCC, From: seg.From, To: tr.T[last+1], i: seg.i, j: last}
	cv := Segment{Kind: ChargeCV, From: tr.T[last+1], To: seg.To, i: last + 1, j: seg.j}
	fillStats(s, ch, &cc)
	fillStats(s, ch, &cv)
	return []Segment{cc, cv}
}

// percentile is the p-quantile of x (of a regular sample when x is long).
func percentile(x []float64, p float64) float64 {
	stride := max(1, (len(x)+medianSample-1)/medianSample)
	c := make([]float64, 0, len(x)/stride+1)
	for i := 0; i < len(x); i += stride {
		c = append(c, x[i])
	}
	sort.Float64s(c)
	return c[int(p*float64(len(c)-1))]
}

// FullAt is the data time (s) the pack counts as full before discharge
// segment d: the end of the last charge taper before it (fromTaper true),
// or, when no charge taper was recorded before it, the start of the first
// discharge.
func FullAt(segs []Segment, d int) (t float64, fromTaper bool) {
	for k := d - 1; k >= 0; k-- {
		if segs[k].Kind == ChargeCV {
			return segs[k].To, true
		}
		if segs[k].Kind == ChargeCC && segs[k].To-segs[k].From > 0 {
			break // a charge without a taper: not known full
		}
	}
	for k := 0; k <= d; k++ {
		if segs[k].Kind == Discharge {
			return segs[k].From, false
		}
	}
	return segs[d].From, false
}
