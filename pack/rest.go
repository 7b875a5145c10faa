package pack

import "strings"

// restPoint is one point of a rest-voltage table: the open-circuit voltage of
// one cell after a rest at a state of charge.
type restPoint struct{ pct, v float64 }

// Rest-voltage tables, state of charge (%) against the cell's voltage after
// a rest (open-circuit voltage at room temperature). Both are typical curves
// written from memory and common practice (no source): real cells differ by
// a few tens of millivolts, and a pack that has not rested reads wrong. They
// only give a starting point for counting ([soc] start = "rest") and a rough
// figure before a start is known, which packwatch marks "uncertain".
var (
	// restNMC: NMC (and, as an approximation, NCA and LCO) against graphite;
	// empty at 3.0 V, full near 4.2 V (common practice, no source).
	restNMC = []restPoint{
		{0, 3.00}, {5, 3.40}, {10, 3.50}, {20, 3.59}, {30, 3.63}, {40, 3.66},
		{50, 3.70}, {60, 3.77}, {70, 3.85}, {80, 3.94}, {90, 4.04}, {100, 4.18},
	}
	// restLFP: LFP against graphite. The curve is nearly flat between about
	// 20 % and 90 %, so a rest voltage there says little (a few mV per 10 %):
	// expect errors of tens of percent in the middle (common practice, no source).
	restLFP = []restPoint{
		{0, 2.80}, {5, 3.10}, {10, 3.20}, {20, 3.25}, {30, 3.28}, {40, 3.29},
		{50, 3.30}, {60, 3.31}, {70, 3.32}, {80, 3.33}, {90, 3.34}, {95, 3.36}, {100, 3.45},
	}
)

// restTable picks the table for a chemistry name; unknown names and "" get NMC.
func restTable(chem string) []restPoint {
	if strings.EqualFold(chem, "lfp") {
		return restLFP
	}
	return restNMC
}

// SOCFromRest estimates the state of charge in percent from the average cell
// voltage after a rest, by linear interpolation in the chemistry's table,
// clamped to 0–100. chem is "nmc" (default), "lfp", "nca" or "lco".
func SOCFromRest(chem string, cellV float64) float64 {
	tab := restTable(chem)
	if !(cellV > tab[0].v) { // also NaN
		if cellV != cellV {
			return nan
		}
		return 0
	}
	for i := 1; i < len(tab); i++ {
		if cellV <= tab[i].v {
			a, b := tab[i-1], tab[i]
			return a.pct + (b.pct-a.pct)*(cellV-a.v)/(b.v-a.v)
		}
	}
	return 100
}
