package pack

import (
	"math"
	"testing"
)

// Facts of the trade, no source (REFERENCES.md, "Cell and thermal models"):
// an NMC cell is empty near 3.0 V and full near 4.2 V at rest; an LFP cell
// rests near 3.3 V over most of its range. The tables are from memory.
func TestSOCFromRest(t *testing.T) {
	tests := []struct {
		chem   string
		v      float64
		lo, hi float64
		fact   string
	}{
		{"nmc", 4.20, 100, 100, "NMC full near 4.2 V (common practice)"},
		{"nmc", 3.00, 0, 0, "NMC empty at 3.0 V (common practice)"},
		{"nmc", 2.50, 0, 0, "below the table clamps to 0"},
		{"", 3.70, 40, 60, "NMC mid charge near 3.6–3.75 V at rest (common practice)"},
		{"nca", 3.70, 40, 60, "NCA uses the NMC table"},
		{"lfp", 3.30, 20, 90, "LFP plateau near 3.3 V (common practice)"},
		{"lfp", 3.45, 100, 100, "LFP full near 3.45 V at rest (common practice)"},
		{"lfp", 2.80, 0, 0, "LFP empty near 2.8 V (common practice)"},
	}
	for _, tc := range tests {
		got := SOCFromRest(tc.chem, tc.v)
		if got < tc.lo-1e-9 || got > tc.hi+1e-9 {
			t.Errorf("%s: SOCFromRest(%q, %.2f) = %.2f %%, want %g–%g", tc.fact, tc.chem, tc.v, got, tc.lo, tc.hi)
		}
	}
	if !math.IsNaN(SOCFromRest("nmc", math.NaN())) {
		t.Error("NaN voltage must give NaN")
	}
	// Both tables must rise strictly, or the interpolation is not a function.
	for name, tab := range map[string][]restPoint{"nmc": restNMC, "lfp": restLFP} {
		for i := 1; i < len(tab); i++ {
			if tab[i].v <= tab[i-1].v || tab[i].pct <= tab[i-1].pct {
				t.Errorf("%s table not rising at %d", name, i)
			}
		}
	}
}
