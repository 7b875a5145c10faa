package sim

import (
	"fmt"
	"math"
)

// OCVTable is a cell's open-circuit (rest) voltage as a function of state of
// charge, given as a table of breakpoints and interpolated linearly between
// them. Construct it with NewOCVTable; the zero value is not usable.
//
// Lookups are O(1): the table is resampled once on a uniform grid of
// ocvGrid intervals, which reproduces the piecewise-linear table exactly when
// every breakpoint lies on that grid (all the built-in tables do).
type OCVTable struct {
	// Name says what the table is, for logs and the scenario description.
	Name string
	z, v []float64 // breakpoints as given
	grid []float64 // v at z = k/ocvGrid, k = 0..ocvGrid
}

const ocvGrid = 200

// NewOCVTable builds a table from breakpoints z (state of charge, 0..1, strictly
// increasing, first 0 and last 1) and voltages v (non-decreasing, volts).
func NewOCVTable(name string, z, v []float64) (*OCVTable, error) {
	if len(z) != len(v) || len(z) < 2 {
		return nil, fmt.Errorf("ocv table %s: need at least two breakpoints and as many voltages as SOC values", name)
	}
	if z[0] != 0 || z[len(z)-1] != 1 {
		return nil, fmt.Errorf("ocv table %s: SOC breakpoints must run from 0 to 1", name)
	}
	for k := 1; k < len(z); k++ {
		if !(z[k] > z[k-1]) {
			return nil, fmt.Errorf("ocv table %s: SOC breakpoints must increase (%g after %g)", name, z[k], z[k-1])
		}
		if v[k] < v[k-1] {
			return nil, fmt.Errorf("ocv table %s: voltage must not fall with SOC (%g V after %g V)", name, v[k], v[k-1])
		}
	}
	t := &OCVTable{Name: name, z: append([]float64(nil), z...), v: append([]float64(nil), v...)}
	t.grid = make([]float64, ocvGrid+1)
	for k := range t.grid {
		t.grid[k] = t.interp(float64(k) / ocvGrid)
	}
	return t, nil
}

// interp interpolates the breakpoints directly (slow path, used to build the grid).
func (t *OCVTable) interp(z float64) float64 {
	if z <= 0 {
		return t.v[0]
	}
	if z >= 1 {
		return t.v[len(t.v)-1]
	}
	k := 1
	for t.z[k] < z {
		k++
	}
	f := (z - t.z[k-1]) / (t.z[k] - t.z[k-1])
	return t.v[k-1] + f*(t.v[k]-t.v[k-1])
}

// At gives the open-circuit voltage at state of charge z (clamped to 0..1).
func (t *OCVTable) At(z float64) float64 {
	if !(z > 0) { // also NaN
		return t.grid[0]
	}
	if z >= 1 {
		return t.grid[ocvGrid]
	}
	x := z * ocvGrid
	k := int(x)
	f := x - float64(k)
	return t.grid[k] + f*(t.grid[k+1]-t.grid[k])
}

// Slope is dOCV/dz at z, V per unit of state of charge (the slope of the
// grid interval that holds z).
func (t *OCVTable) Slope(z float64) float64 {
	k := int(clamp(z, 0, 1) * ocvGrid)
	if k >= ocvGrid {
		k = ocvGrid - 1
	}
	return (t.grid[k+1] - t.grid[k]) * ocvGrid
}

// SOC inverts the table: the state of charge whose rest voltage is v, clamped
// to 0..1. On a flat stretch it returns the lowest SOC with that voltage.
func (t *OCVTable) SOC(v float64) float64 {
	if math.IsNaN(v) || v <= t.v[0] {
		return 0
	}
	if v >= t.v[len(t.v)-1] {
		return 1
	}
	k := 1
	for t.v[k] < v {
		k++
	}
	if t.v[k] == t.v[k-1] {
		return t.z[k-1]
	}
	return t.z[k-1] + (v-t.v[k-1])/(t.v[k]-t.v[k-1])*(t.z[k]-t.z[k-1])
}

// Rest-voltage tables of the chemistries the profile language names. These
// are typical shapes of a cell at about 25 °C after a long rest, written from
// memory of published curves (no datasheet was consulted; values from memory):
// an NMC/graphite cell is full near 4.2 V and sits near 3.6–3.7 V at mid
// charge, an LFP/graphite cell has a long plateau near 3.3 V (facts of the
// trade, no source). They hold the same points as the rest-voltage table
// packwatch uses to estimate a starting state of charge (pack/rest.go), so
// that the demo's counted charge starts where the simulated pack is. For the
// demo and for test data, never for judging a real pack.
var (
	nmcZ = []float64{0, 0.05, 0.10, 0.20, 0.30, 0.40, 0.50, 0.60, 0.70, 0.80, 0.90, 1}
	nmcV = []float64{3.00, 3.40, 3.50, 3.59, 3.63, 3.66, 3.70, 3.77, 3.85, 3.94, 4.04, 4.18}
	lfpZ = []float64{0, 0.05, 0.10, 0.20, 0.30, 0.40, 0.50, 0.60, 0.70, 0.80, 0.90, 0.95, 1}
	lfpV = []float64{2.80, 3.10, 3.20, 3.25, 3.28, 3.29, 3.30, 3.31, 3.32, 3.33, 3.34, 3.36, 3.45}
)

// ChemistryOCV returns the built-in rest-voltage table for a profile's
// chemistry: "nmc" (also the default for ""), "lfp"; "nca" and "lco" use the
// NMC table, close enough for a simulation (common practice, no source).
func ChemistryOCV(chem string) (*OCVTable, error) {
	switch chem {
	case "", "nmc", "nca", "lco":
		return NewOCVTable("nmc/graphite rest voltage, typical, from memory", nmcZ, nmcV)
	case "lfp":
		return NewOCVTable("lfp/graphite rest voltage, typical, from memory", lfpZ, lfpV)
	}
	return nil, fmt.Errorf("no rest-voltage table for chemistry %q (known: nmc, lfp, nca, lco)", chem)
}
