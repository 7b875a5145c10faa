package pack

import "math"

// Charge-time model constants (common practice, no source).
const (
	// endCRate: a constant-voltage charge ends when the current has fallen to
	// C/20 (0.05 C).
	endCRate = 0.05
	// cvHours: the constant-voltage phase starts roughly where the charge
	// still missing equals cvHours at the constant current, so it begins
	// earlier at a higher rate: at 0.5 C near 87 % and at 1 C near 75 %.
	cvHours = 0.25
)

// TimeToFull estimates the seconds until a charge at present current amps
// ends, for a pack at soc (fraction 0–1) of capAh ampere-hours. It is rough:
// the charge runs at constant current until the constant-voltage phase, then
// the current decays exponentially to C/20, delivering exactly the missing
// charge. inCV says the pack is already in the constant-voltage phase (the
// highest cell is at the charge voltage). It returns NaN when not charging
// or when the inputs are unknown.
func TimeToFull(soc, capAh, amps float64, inCV bool) float64 {
	if !(amps > 0) || !(capAh > 0) || math.IsNaN(soc) || math.IsInf(amps, 0) {
		return nan
	}
	soc = math.Min(math.Max(soc, 0), 1)
	iEnd := endCRate * capAh
	if amps <= iEnd {
		// Tapered out already: whatever is missing at this current.
		return (1 - soc) * capAh * 3600 / amps
	}
	zCV := 1 - cvHours*amps/capAh
	zCV = math.Min(math.Max(zCV, 0.5), 0.98)
	if inCV || soc > zCV {
		zCV = soc
	}
	tCC := (zCV - soc) * capAh * 3600 / amps
	// CV phase: i(t) = I·e^(−t/τ) until iEnd delivers τ·(I − iEnd) = missing.
	missingAs := (1 - zCV) * capAh * 3600
	tau := missingAs / (amps - iEnd)
	return tCC + tau*math.Log(amps/iEnd)
}

// TimeToEmpty is the seconds until the counted charge runs out at present
// current (negative = discharging), for a pack at soc (fraction 0–1) of
// capAh ampere-hours. NaN when not discharging or unknown.
func TimeToEmpty(soc, capAh, amps float64) float64 {
	if !(amps < 0) || !(capAh > 0) || math.IsNaN(soc) || math.IsInf(amps, 0) {
		return nan
	}
	return math.Max(soc, 0) * capAh * 3600 / -amps
}
