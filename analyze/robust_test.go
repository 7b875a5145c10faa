package analyze

import (
	"encoding/json"
	"io"
	"math/rand/v2"
	"testing"
)

// TestAnalyzeNeverFails feeds sessions of random shape (steps, gaps, missing
// channels, a few readings, out-of-order times): the analysis must not
// panic and its report must always serialise (no NaN reaches JSON,
// RFC 8259 §6).
func TestAnalyzeNeverFails(t *testing.T) {
	for seed := uint64(0); seed < 200; seed++ {
		rng := rand.New(rand.NewPCG(seed, 99))
		nc := rng.IntN(4)
		s := &Session{Pack: PackInfo{Cells: nc, Sensors: 1, CapacityAh: []float64{0, 1, 50}[rng.IntN(3)]},
			Cells: make([]Trace, nc), Temps: make([]Trace, 1)}
		n := rng.IntN(3000)
		level := 0.0
		tt := 0.0
		for k := 0; k < n; k++ {
			if rng.Float64() < 0.01 {
				level = (rng.Float64() - 0.5) * 200
			}
			tt += rng.Float64() * 2
			if rng.Float64() < 0.002 {
				s.Gaps = append(s.Gaps, tt)
				tt += 100
			}
			i := level + rng.NormFloat64()*[]float64{0, 0.1, 5}[int(seed)%3]
			s.Current.Add(tt, i)
			if rng.Float64() < 0.9 {
				s.PackV.Add(tt+rng.Float64(), 40+0.01*i+rng.NormFloat64()*0.01)
			}
			for c := range s.Cells {
				if rng.Float64() < 0.5 {
					s.Cells[c].Add(tt+rng.Float64()-0.5, 3.6+0.002*i)
				}
			}
			if rng.Float64() < 0.1 {
				s.Temps[0].Add(tt, 25+rng.Float64())
			}
			if rng.Float64() < 0.01 {
				s.Link.Add(tt, rng.Float64()*40)
				s.Main.Add(tt, float64(rng.IntN(2)))
				s.Precharge.Add(tt, float64(rng.IntN(2)))
			}
		}
		s.Finish()
		rep := Analyze(s, Options{})
		if _, err := json.Marshal(rep); err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		SessionCurves(s, Options{StepAh: 0.01})
		if seed%10 == 0 {
			if err := WriteHTML(io.Discard, rep); err != nil {
				t.Fatalf("seed %d: html: %v", seed, err)
			}
		}
	}
}
