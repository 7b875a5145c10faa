package sim

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"os"
	"strings"
	"time"

	"github.com/pelletier/go-toml/v2"

	"packwatch/config"
)

// Scenario is a story for the simulator: the pack's starting point, how its
// cells and sensors differ from one another, and a list of steps (rest,
// charge, discharge) run in order. It can be written in TOML (see
// testdata/scenario-example.toml) or built in code; BuiltinScenario and
// GenericScenario make the ones packwatch ships.
type Scenario struct {
	Name        string `toml:"name"`
	Description string `toml:"description"`
	// AmbientC is the ambient temperature, °C (default 20).
	AmbientC *float64 `toml:"ambient_c"`
	// StartSOCPct is every cell's state of charge at the start, % (default 50).
	StartSOCPct *float64 `toml:"start_soc_pct"`
	// End says what happens after the last step: "loop" (default) starts
	// again from the first step with the pack as it is; "hold" rests forever.
	End     string       `toml:"end"`
	Cells   []CellSpec   `toml:"cell"`
	Sensors []SensorSpec `toml:"sensor"`
	Steps   []Step       `toml:"step"`
}

// CellSpec makes one cell differ from the others.
type CellSpec struct {
	N int `toml:"n"` // cell number, from 1
	// CapacityFactor multiplies the cell's capacity (0.96 = 4 % less). The
	// pack starts balanced at the top, as a BMS leaves it: the cell has as
	// much room to full as the others, so it holds less charge below full.
	CapacityFactor float64 `toml:"capacity_factor"`
	// R0Factor multiplies its series resistance.
	R0Factor float64 `toml:"r0_factor"`
	// SOCOffsetPct shifts its starting state of charge, in percent points.
	SOCOffsetPct float64 `toml:"soc_offset_pct"`
}

// SensorSpec makes one temperature sensor differ from the others.
type SensorSpec struct {
	N int `toml:"n"` // sensor number, from 1
	// BusbarMilliohm is the resistance of a busbar the sensor sits on, mΩ.
	BusbarMilliohm float64 `toml:"busbar_milliohm"`
	// HeatCapacityFactor multiplies the node's heat capacity (below 1: it
	// warms faster).
	HeatCapacityFactor float64 `toml:"heat_capacity_factor"`
	// HeatW is a fixed extra heat input, W.
	HeatW float64 `toml:"heat_w"`
	// StartC is the sensor's starting temperature (default ambient).
	StartC *float64 `toml:"start_c"`
}

// Step is one part of a story.
type Step struct {
	// Kind is "rest", "charge" or "discharge".
	Kind string `toml:"kind"`
	// For is the step's length in simulated time; for charge and discharge an
	// upper bound (0: until its end condition).
	For Duration `toml:"for"`
	// CurrentA: the constant current of a charge; the steady draw of a
	// discharge (a positive number), A.
	CurrentA float64 `toml:"current_a"`
	// CellV is a charge's constant-voltage target per cell (the charger
	// holds the pack at cells × CellV).
	CellV float64 `toml:"cell_v"`
	// CutoffA ends the constant-voltage phase when the current tapers below it.
	CutoffA float64 `toml:"cutoff_a"`
	// BurstA is a discharge's burst current on top of the steady draw, A.
	BurstA float64 `toml:"burst_a"`
	// BurstFor and BurstEvery shape the bursts: BurstFor long, one every
	// BurstEvery, the first after BurstEvery.
	BurstFor   Duration `toml:"burst_for"`
	BurstEvery Duration `toml:"burst_every"`
	// UntilCellV ends a discharge when the lowest cell's terminal voltage
	// reaches it (the low-voltage warning).
	UntilCellV float64 `toml:"until_cell_v"`
	// UntilSOCPct ends a discharge when the mean state of charge reaches it.
	UntilSOCPct float64 `toml:"until_soc_pct"`
}

// Duration is a time.Duration written as text in TOML ("10m", "1h30m").
type Duration time.Duration

// UnmarshalText parses a Go duration string.
func (d *Duration) UnmarshalText(b []byte) error {
	v, err := time.ParseDuration(string(b))
	if err != nil {
		return fmt.Errorf("duration %q: %w", b, err)
	}
	*d = Duration(v)
	return nil
}

// MarshalText writes the duration as a Go duration string.
func (d Duration) MarshalText() ([]byte, error) { return []byte(time.Duration(d).String()), nil }

// Seconds gives the duration in seconds.
func (d Duration) Seconds() float64 { return time.Duration(d).Seconds() }

// ScenarioNames lists the built-in scenarios by name.
func ScenarioNames() []string { return []string{"generic", "buoy-winch"} }

// LoadScenario finds a scenario by built-in name ("generic", "buoy-winch")
// or reads it from a TOML file; "" means the generic story of the profile.
func LoadScenario(nameOrFile string, p *config.Profile) (*Scenario, error) {
	switch nameOrFile {
	case "", "generic":
		return GenericScenario(p), nil
	case "buoy-winch":
		return BuoyWinchScenario(), nil
	}
	b, err := os.ReadFile(nameOrFile)
	if err != nil {
		return nil, fmt.Errorf("scenario %s (not a built-in name: %s): %w", nameOrFile, strings.Join(ScenarioNames(), ", "), err)
	}
	return ParseScenario(nameOrFile, b)
}

// ParseScenario reads a scenario from TOML; name is used in errors.
func ParseScenario(name string, b []byte) (*Scenario, error) {
	var sc Scenario
	dec := toml.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&sc); err != nil {
		var sm *toml.StrictMissingError
		if errors.As(err, &sm) && len(sm.Errors) > 0 {
			var keys []string
			for _, e := range sm.Errors {
				row, col := e.Position()
				keys = append(keys, fmt.Sprintf("%s (line %d, column %d)", strings.Join(e.Key(), "."), row, col))
			}
			return nil, fmt.Errorf("scenario %s: unknown key %s", name, strings.Join(keys, ", "))
		}
		var de *toml.DecodeError
		if errors.As(err, &de) {
			row, col := de.Position()
			return nil, fmt.Errorf("scenario %s:%d:%d: %w", name, row, col, err)
		}
		return nil, fmt.Errorf("scenario %s: %w", name, err)
	}
	if sc.Name == "" {
		sc.Name = name
	}
	if err := sc.Validate(); err != nil {
		return nil, fmt.Errorf("scenario %s: %w", name, err)
	}
	return &sc, nil
}

// Validate checks a scenario on its own (the cell and sensor numbers are
// checked against the profile when the simulator is built).
func (sc *Scenario) Validate() error {
	if len(sc.Steps) == 0 {
		return fmt.Errorf("no [[step]]")
	}
	switch sc.End {
	case "", "loop", "hold":
	default:
		return fmt.Errorf("end = %q: want \"loop\" or \"hold\"", sc.End)
	}
	if err := sc.finite(); err != nil {
		return err
	}
	if sc.StartSOCPct != nil && (*sc.StartSOCPct < 0 || *sc.StartSOCPct > 100) {
		return fmt.Errorf("start_soc_pct = %g: want 0 to 100", *sc.StartSOCPct)
	}
	for _, c := range sc.Cells {
		if c.N < 1 {
			return fmt.Errorf("[[cell]] n = %d: cells count from 1", c.N)
		}
		if c.CapacityFactor < 0 || c.R0Factor < 0 {
			return fmt.Errorf("[[cell]] n = %d: factors must not be negative", c.N)
		}
	}
	for _, s := range sc.Sensors {
		if s.N < 1 {
			return fmt.Errorf("[[sensor]] n = %d: sensors count from 1", s.N)
		}
		if s.HeatCapacityFactor < 0 || s.BusbarMilliohm < 0 {
			return fmt.Errorf("[[sensor]] n = %d: values must not be negative", s.N)
		}
	}
	for k, st := range sc.Steps {
		where := fmt.Sprintf("step %d (%s)", k+1, st.Kind)
		if st.For < 0 || st.BurstFor < 0 || st.BurstEvery < 0 {
			return fmt.Errorf("%s: durations must not be negative", where)
		}
		switch st.Kind {
		case "rest":
			if st.For <= 0 {
				return fmt.Errorf("%s: a rest needs for = \"...\"", where)
			}
		case "charge":
			if st.CurrentA <= 0 || st.CellV <= 0 {
				return fmt.Errorf("%s: a charge needs current_a > 0 and cell_v > 0", where)
			}
			if st.CutoffA <= 0 && st.For <= 0 {
				return fmt.Errorf("%s: a charge needs cutoff_a or for, or it never ends", where)
			}
		case "discharge":
			if st.CurrentA < 0 || st.BurstA < 0 {
				return fmt.Errorf("%s: currents are positive numbers (draw)", where)
			}
			if st.BurstA > 0 && (st.BurstFor <= 0 || st.BurstEvery <= st.BurstFor) {
				return fmt.Errorf("%s: bursts need burst_for > 0 and burst_every > burst_for", where)
			}
			if st.UntilCellV <= 0 && st.UntilSOCPct <= 0 && st.For <= 0 {
				return fmt.Errorf("%s: a discharge needs until_cell_v, until_soc_pct or for", where)
			}
			if st.CurrentA == 0 && st.BurstA == 0 {
				return fmt.Errorf("%s: a discharge needs current_a or burst_a", where)
			}
		default:
			return fmt.Errorf("%s: kind must be rest, charge or discharge", where)
		}
	}
	return nil
}

func f64(v float64) *float64 { return &v }

// finite rejects NaN and infinities anywhere in the scenario.
func (sc *Scenario) finite() error {
	bad := func(what string, v float64) error {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%s = %g: want a finite number", what, v)
		}
		return nil
	}
	var errs []error
	if sc.AmbientC != nil {
		errs = append(errs, bad("ambient_c", *sc.AmbientC))
	}
	if sc.StartSOCPct != nil {
		errs = append(errs, bad("start_soc_pct", *sc.StartSOCPct))
	}
	for _, c := range sc.Cells {
		errs = append(errs, bad("capacity_factor", c.CapacityFactor), bad("r0_factor", c.R0Factor), bad("soc_offset_pct", c.SOCOffsetPct))
	}
	for _, s := range sc.Sensors {
		errs = append(errs, bad("busbar_milliohm", s.BusbarMilliohm), bad("heat_capacity_factor", s.HeatCapacityFactor), bad("heat_w", s.HeatW))
		if s.StartC != nil {
			errs = append(errs, bad("start_c", *s.StartC))
		}
	}
	for _, st := range sc.Steps {
		errs = append(errs, bad("current_a", st.CurrentA), bad("cell_v", st.CellV), bad("cutoff_a", st.CutoffA),
			bad("burst_a", st.BurstA), bad("until_cell_v", st.UntilCellV), bad("until_soc_pct", st.UntilSOCPct))
	}
	return errors.Join(errs...)
}

// BuoyWinchScenario is packwatch's own demo story, for the example profile
// config/examples/buoy-winch.toml (12 NMC cells of 180 Ah, 3 sensors): the
// buoy's pack rests, charges at 20 A to 4.15 V per cell and tapers, rests,
// then runs winch pulls of 250 A for 20 s every 3 minutes over a 3 A
// instrument draw until the lowest cell reaches the low-voltage warning
// (3.05 V), and starts over. Cell 7 has 4 % less capacity than the rest;
// sensor 3 sits by a busbar and warms fastest. Invented; no real buoy.
func BuoyWinchScenario() *Scenario {
	return &Scenario{
		Name:        "buoy-winch",
		Description: "survey buoy winch pack: rest, 20 A charge to 4.15 V/cell with taper, rest, 250 A winch pulls until the low-voltage warning; loops",
		AmbientC:    f64(12),
		StartSOCPct: f64(30),
		End:         "loop",
		Cells:       []CellSpec{{N: 7, CapacityFactor: 0.96}},
		Sensors:     []SensorSpec{{N: 3, BusbarMilliohm: 0.15, HeatCapacityFactor: 0.3}},
		Steps: []Step{
			{Kind: "rest", For: Duration(10 * time.Minute)},
			{Kind: "charge", CurrentA: 20, CellV: 4.15, CutoffA: 4},
			{Kind: "rest", For: Duration(15 * time.Minute)},
			{Kind: "discharge", CurrentA: 3, BurstA: 250, BurstFor: Duration(20 * time.Second),
				BurstEvery: Duration(3 * time.Minute), UntilCellV: 3.05},
			{Kind: "rest", For: Duration(10 * time.Minute)},
		},
	}
}

// GenericScenario builds a story for any profile from its [pack] and
// [limits]: a 10-minute rest, a charge at C/5 (at most 80 % of the charge
// current limit) to 30 mV below the chemistry's full rest voltage (at most
// 0.1 V below cell_high_v) with a taper to C/50, a rest, then a discharge of C/10 with
// bursts of 1C (at most 60 % of the discharge limit) for 20 s every 3
// minutes until the lowest cell is within the warning margin of cell_low_v;
// and again.
func GenericScenario(p *config.Profile) *Scenario {
	q := p.Pack.CapacityAh
	if q <= 0 {
		q = 100
	}
	chg := 0.2 * q
	if l := p.Limits.ChargeCurrent; l != nil && *l > 0 {
		chg = math.Min(chg, 0.8**l)
	}
	burst := q
	if l := p.Limits.DischargeCurrent; l != nil && *l > 0 {
		burst = math.Min(burst, 0.6**l)
	}
	// the charger stops 30 mV below the rest voltage of a full cell
	full := 4.15
	if tab, err := ChemistryOCV(p.Pack.Chemistry); err == nil {
		full = math.Round((tab.At(1)-0.03)*1000) / 1000
	}
	cv := full
	if p.Limits.CellHighV > 0 {
		cv = math.Min(cv, p.Limits.CellHighV-0.1)
	}
	warn := 0.05
	if p.Warn.CellV != nil && *p.Warn.CellV > 0 {
		warn = *p.Warn.CellV
	}
	low := 3.0
	if p.Pack.Chemistry == "lfp" {
		low = 2.8
	}
	if p.Limits.CellLowV > 0 {
		low = p.Limits.CellLowV
	}
	return &Scenario{
		Name:        "generic",
		Description: fmt.Sprintf("generic story for %q: rest, charge %.3g A to %.3g V/cell, rest, discharge %.3g A with %.3g A bursts until %.3g V", p.Pack.Name, chg, cv, 0.1*q, burst, low+warn),
		AmbientC:    f64(20),
		StartSOCPct: f64(40),
		End:         "loop",
		Steps: []Step{
			{Kind: "rest", For: Duration(10 * time.Minute)},
			{Kind: "charge", CurrentA: chg, CellV: cv, CutoffA: 0.02 * q},
			{Kind: "rest", For: Duration(10 * time.Minute)},
			{Kind: "discharge", CurrentA: 0.1 * q, BurstA: burst, BurstFor: Duration(20 * time.Second),
				BurstEvery: Duration(3 * time.Minute), UntilCellV: low + warn},
			{Kind: "rest", For: Duration(10 * time.Minute)},
		},
	}
}
