package sim

import (
	"math"
	"os"
	"strings"
	"testing"
	"time"
)

func TestParseScenarioExample(t *testing.T) {
	sc, err := LoadScenario("testdata/scenario-example.toml", nil)
	if err != nil {
		t.Fatal(err)
	}
	if sc.Name != "bench-cycle" || sc.End != "hold" || len(sc.Steps) != 3 || *sc.StartSOCPct != 45 {
		t.Fatalf("parsed %+v", sc)
	}
	if st := sc.Steps[2]; st.BurstFor != Duration(10*time.Second) || st.BurstEvery != Duration(2*time.Minute) || st.UntilCellV != 3.30 {
		t.Errorf("discharge step %+v", st)
	}
	// it runs on the example profile and holds at the end
	dm := loadMap(t, buoyProfile)
	s, err := New(dm, Options{Scenario: sc, Speed: SpeedMax, Start: t0})
	if err != nil {
		t.Fatal(err)
	}
	if l := s.StoryLength(); l < time.Hour || l > 24*time.Hour {
		t.Errorf("story length %v", l)
	}
}

func TestBuiltinScenariosValid(t *testing.T) {
	dm := loadMap(t, buoyProfile)
	for _, name := range ScenarioNames() {
		sc, err := LoadScenario(name, dm.Profile())
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if err := sc.Validate(); err != nil {
			t.Errorf("%s: %v", name, err)
		}
	}
	// the generic story follows the profile's limits: C/5 = 36 A is within
	// 0.8 × 60 A; bursts 1C = 180 A, within 0.6 × 400 A; CV 4.15 V, below
	// 4.25 − 0.1; until 3.00 + 0.05 V
	g := GenericScenario(dm.Profile())
	if g.Steps[1].CurrentA != 36 || g.Steps[1].CellV != 4.15 || g.Steps[3].BurstA != 180 || g.Steps[3].UntilCellV != 3.05 {
		t.Errorf("generic steps %+v", g.Steps)
	}
}

func TestParseScenarioErrors(t *testing.T) {
	base, err := os.ReadFile("testdata/scenario-example.toml")
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct{ from, to, want string }{
		{`end = "hold"`, `end = "stop"`, "end"},
		{`for = "5m"`, `for = "five"`, "duration"},
		{`for = "5m"`, `fore = "5m"`, "fore"},
		{`kind = "rest"`, `kind = "nap"`, "kind"},
		{`cutoff_a = 5`, `cutoff_a = 0`, "cutoff"},
		{`burst_every = "2m"`, `burst_every = "5s"`, "burst"},
		{`until_cell_v = 3.30`, ``, "until"},
		{`start_soc_pct = 45`, `start_soc_pct = 145`, "start_soc_pct"},
		{`n = 2`, `n = 0`, "n = 0"},
		{`start_soc_pct = 45`, `start_soc_pct = nan`, "finite"},
		{`current_a = 60`, `current_a = inf`, "finite"},
	}
	for _, c := range cases {
		text := strings.Replace(string(base), c.from, c.to, 1)
		_, err := ParseScenario("case.toml", []byte(text))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q → %q: error %v, want one mentioning %q", c.from, c.to, err, c.want)
		}
	}
	if _, err := LoadScenario("no-such-scenario", nil); err == nil || !strings.Contains(err.Error(), "buoy-winch") {
		t.Errorf("unknown name: %v", err)
	}
	dm := loadMap(t, buoyProfile)
	sc, _ := LoadScenario("testdata/scenario-example.toml", nil)
	sc.Cells[0].N = 13
	if _, err := New(dm, Options{Scenario: sc, Start: t0}); err == nil {
		t.Error("cell 13 of a 12-cell pack accepted")
	}
}

// The generic story of an LFP pack charges with a taper too: its CV target
// lies below the full rest voltage of the chemistry.
func TestGenericLFPTapers(t *testing.T) {
	dm := loadMap(t, buoyProfile)
	p := *dm.Profile()
	p.Pack.Chemistry = "lfp"
	sc := GenericScenario(&p)
	if cv := sc.Steps[1].CellV; math.Abs(cv-3.42) > 1e-9 {
		t.Fatalf("LFP CV %g V, want 3.42", cv)
	}
	m, err := buildModel(&p, sc, nil, 1)
	if err != nil {
		t.Fatal(err)
	}
	st := newStory(sc, m)
	tapered := false
	for n := 0; n < 100000 && st.step <= 1; n++ {
		st.tick(1)
		tapered = tapered || st.cv
	}
	if !tapered || st.step != 2 {
		t.Errorf("LFP charge: taper %v, now in step %d", tapered, st.step)
	}
}
