package pack

import (
	"math"
	"strconv"
	"strings"

	"packwatch/config"
)

// socMode is how the counted state of charge gets its starting point.
type socMode uint8

const (
	socRest   socMode = iota // from the rest-voltage table after a rest
	socFull                  // 100 % at the end of a charge taper
	socNumber                // a fixed starting percentage
	socBMS                   // the value the BMS reports
)

// RestNs is how long the current must stay inside the dead-band before the
// cell voltages count as rest voltages for [soc] start = "rest": 30 minutes
// (cells relax over tens of minutes to hours; common practice, no source).
const RestNs = 30 * 60 * secondNs

// socState is the counted state of charge: an anchor (z0 at the counter's
// NetAs base) plus what the counter adds since.
type socState struct {
	mode     socMode
	startPct float64
	hasBMS   bool // the profile binds pack.soc

	anchored  bool
	uncertain bool // counted across a gap, or only a rough start known
	z0        float64
	base      float64 // counter NetAs at the anchor, A·s

	resting   bool
	restSince int64
	taper     bool // a constant-voltage taper is under way
}

// newSOCState reads [soc] start. Absent, it is "bms" when the profile binds
// pack.soc, else "rest".
func newSOCState(p *config.Profile, hasBMS bool) socState {
	s := socState{mode: socRest, hasBMS: hasBMS}
	if hasBMS {
		s.mode = socBMS
	}
	switch v := p.SOC.Start.(type) {
	case string:
		switch strings.ToLower(strings.TrimSpace(v)) {
		case "rest":
			s.mode = socRest
		case "full":
			s.mode = socFull
		case "bms":
			s.mode = socBMS
		default:
			if f, err := strconv.ParseFloat(strings.TrimSuffix(strings.TrimSpace(v), "%"), 64); err == nil {
				s.mode, s.startPct = socNumber, f
			}
		}
	case int64:
		s.mode, s.startPct = socNumber, float64(v)
	case float64:
		s.mode, s.startPct = socNumber, v
	case int:
		s.mode, s.startPct = socNumber, float64(v)
	}
	if s.mode == socNumber {
		s.startPct = math.Min(math.Max(s.startPct, 0), 100)
		s.anchor(s.startPct/100, 0, false)
	}
	return s
}

func (s *socState) anchor(z, netAs float64, uncertain bool) {
	s.anchored, s.z0, s.base, s.uncertain = true, z, netAs, uncertain
}

// z is the counted state of charge as a fraction, NaN when no start is known.
func (s *socState) z(netAs, capAh float64) float64 {
	if !s.anchored || !(capAh > 0) {
		return nan
	}
	return SOCAfter(s.z0, netAs-s.base, capAh)
}

// gap marks the count uncertain: charge moved that was not counted.
func (s *socState) gap() {
	if s.anchored {
		s.uncertain = true
	}
}

// restart forgets the start (a different pack): a numeric start applies
// again but is marked uncertain, since it was meant for the pack before.
func (s *socState) restart() {
	*s = socState{mode: s.mode, startPct: s.startPct, hasBMS: s.hasBMS}
	if s.mode == socNumber {
		s.anchor(s.startPct/100, 0, true)
	}
}
