package analyze

import (
	"fmt"
	"math"
)

// DefaultCloseRatio is the load side's share of the pack voltage at which
// the main contactor may close (common practice, no source: 90–95 %).
const DefaultCloseRatio = 0.95

// Precharge is one pre-charge of the load side.
type Precharge struct {
	Start Num `json:"t_s"` // the pre-charge contactor closed (or the link began to rise)
	// MainClosed is when the main contactor's feedback closed, null if it
	// did not within a minute.
	MainClosed Num `json:"main_closed_s"`
	// TimeToRatio is how long the link took to reach CloseRatio of the pack
	// voltage, s (null if it never did before the main contactor closed).
	TimeToRatio Num `json:"time_to_ratio_s"`
	CloseRatio  Num `json:"close_ratio"`
	// RatioAtClose is link/pack at the last link reading before the main
	// contactor closed.
	RatioAtClose Num    `json:"ratio_at_close"`
	PackV        Num    `json:"pack_v"`
	Flag         string `json:"flag,omitempty"`
}

// PrechargeEvents finds pre-charges where link.voltage and a contactor are
// bound: each rise of contactor.precharge (or, without it, each rise of
// contactor.main, looking back to where the link began to rise).
func PrechargeEvents(s *Session, ratio float64) []Precharge {
	if ratio <= 0 || ratio >= 1 {
		ratio = DefaultCloseRatio
	}
	if s.Link.Empty() || (s.Precharge.Empty() && s.Main.Empty()) {
		return nil
	}
	var out []Precharge
	if !s.Precharge.Empty() {
		for _, t := range rises(&s.Precharge) {
			out = append(out, measurePrecharge(s, t, ratio))
		}
		return out
	}
	for _, tm := range rises(&s.Main) {
		// the start: the last link reading below 5 % of the pack before tm
		start := math.NaN()
		j := s.Link.Before(tm)
		for k := j; k >= 0 && tm-s.Link.T[k] < 60; k-- {
			pv, _ := s.PackV.At(s.Link.T[k])
			if pv > 0 && s.Link.V[k] < 0.05*pv {
				start = s.Link.T[k]
				break
			}
		}
		if math.IsNaN(start) {
			continue
		}
		out = append(out, measurePrecharge(s, start, ratio))
	}
	return out
}

// rises lists the times a flag trace went from 0 to 1.
func rises(tr *Trace) []float64 {
	var out []float64
	for k := 1; k < tr.Len(); k++ {
		if tr.V[k] != 0 && tr.V[k-1] == 0 {
			out = append(out, tr.T[k])
		}
	}
	return out
}

func measurePrecharge(s *Session, start, ratio float64) Precharge {
	p := Precharge{Start: Num(start), CloseRatio: Num(ratio), MainClosed: none, TimeToRatio: none, RatioAtClose: none, PackV: none}
	end := start + 60
	for k := 1; k < s.Main.Len(); k++ {
		if s.Main.T[k] > start && s.Main.V[k] != 0 && s.Main.V[k-1] == 0 {
			if s.Main.T[k] <= end {
				p.MainClosed = Num(s.Main.T[k])
				end = s.Main.T[k]
			}
			break
		}
	}
	if pv, ok := s.PackV.At(start); ok {
		p.PackV = Num(pv)
	}
	i, j := s.Link.Window(start, end)
	prevT, prevR := math.NaN(), math.NaN()
	for k := i; k < j; k++ {
		pv, ok := s.PackV.At(s.Link.T[k])
		if !ok || pv <= 0 {
			continue
		}
		r := s.Link.V[k] / pv
		if !p.TimeToRatio.Valid() && r >= ratio {
			t := s.Link.T[k]
			if !math.IsNaN(prevR) && prevR < ratio {
				t = lerp(prevR, prevT, r, s.Link.T[k], ratio) // the crossing between readings
			}
			p.TimeToRatio = Num(t - start)
		}
		prevT, prevR = s.Link.T[k], r
		p.RatioAtClose = Num(r)
	}
	if p.MainClosed.Valid() && p.RatioAtClose.Valid() && float64(p.RatioAtClose) < ratio {
		p.Flag = fmt.Sprintf("the main contactor closed with the load side at %.0f %% of the pack voltage (below %.0f %%)", 100*float64(p.RatioAtClose), 100*ratio)
	}
	return p
}
