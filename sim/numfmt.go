package sim

import (
	"math"
	"strconv"
	"strings"
)

// numForms is how many ways formatNum can write a number.
const numForms = 10

// formatNum writes x in form k: 0 the shortest exact decimal (if it has at
// most 6 decimals), 1–6 with 6 down to 1 decimals, 7 a whole number, 8 and 9
// hex with 0x in lower and upper case (x ≥ 0). ok is false when the form
// does not apply.
func formatNum(x float64, k int) (string, bool) {
	switch {
	case k == 0:
		s := strconv.FormatFloat(x, 'f', -1, 64)
		if i := strings.IndexByte(s, '.'); i >= 0 && len(s)-i-1 > 6 {
			return "", false
		}
		return s, true
	case k <= 6:
		return strconv.FormatFloat(x, 'f', 7-k, 64), true
	case k == 7:
		return strconv.FormatFloat(math.Round(x), 'f', 0, 64), true
	case x < 0:
		return "", false
	case k == 8:
		return "0x" + strconv.FormatUint(uint64(math.Round(x)), 16), true
	default:
		return "0x" + strings.ToUpper(strconv.FormatUint(uint64(math.Round(x)), 16)), true
	}
}

// formatFor writes num in the most precise form the capture group accepts
// (see formatNum), trying *hint first (the form that fitted last time; may
// be nil); a negative number the group does not accept becomes 0.
func formatFor(g *lineGen, group int, num float64, hint ...*int) (string, bool) {
	var h *int
	if len(hint) > 0 {
		h = hint[0]
	}
	try := func(x float64) (string, bool) {
		if h != nil {
			if s, ok := formatNum(x, *h); ok && g.Fits(group, s) {
				return s, true
			}
		}
		for k := 0; k < numForms; k++ {
			if s, ok := formatNum(x, k); ok && g.Fits(group, s) {
				if h != nil {
					*h = k
				}
				return s, true
			}
		}
		return "", false
	}
	if s, ok := try(num); ok {
		return s, true
	}
	if num < 0 {
		return try(0)
	}
	return "", false
}

// formatIndex writes a line's index number as its group accepts it: as it
// is, or with leading zeros to 2, 3 or 4 digits ("C03" for `C(?P<n>\d{2})`).
func formatIndex(g *lineGen, group, idx int) string {
	s := strconv.Itoa(idx)
	if g.Fits(group, s) {
		return s
	}
	for w := len(s) + 1; w <= 4; w++ {
		p := strings.Repeat("0", w-len(s)) + s
		if g.Fits(group, p) {
			return p
		}
	}
	return s
}
