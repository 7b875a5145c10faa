package sim

import (
	"math"
	"os"
	"regexp"
	"testing"
)

// Parsing a fault never panics, and what parses writes back the same.
func FuzzParseFault(f *testing.F) {
	for _, s := range []string{"weak-cell:7", "sensor-stop:2@5m", "silent:console@90s", "fault-flag", "low-soc", "x:y@z", "cell-high:99999999999999999999", "@", ":"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		ft, err := ParseFault(s)
		if err != nil {
			return
		}
		back, err := ParseFault(ft.String())
		if err != nil || back != ft {
			t.Fatalf("%q → %+v → %q → %+v, %v", s, ft, ft.String(), back, err)
		}
	})
}

// Parsing a scenario never panics, and any scenario that parses keeps the
// pack physical (states of charge within 0..1, finite voltages).
func FuzzParseScenario(f *testing.F) {
	if b, err := os.ReadFile("testdata/scenario-example.toml"); err == nil {
		f.Add(b)
	}
	f.Add([]byte("[[step]]\nkind = \"rest\"\nfor = \"1s\"\n"))
	f.Add([]byte("end = 3"))
	dm := loadMap(f, buoyProfile)
	f.Fuzz(func(t *testing.T, b []byte) {
		sc, err := ParseScenario("fuzz", b)
		if err != nil {
			return
		}
		// whatever it says, the pack stays physical
		m, err := buildModel(dm.Profile(), sc, nil, 1)
		if err != nil {
			return
		}
		st := newStory(sc, m)
		for k := 0; k < 200; k++ {
			st.tick(10)
			for c := range m.Cells {
				z, v := m.Cells[c].SOC(), m.Cells[c].Voltage(m.I)
				if z < 0 || z > 1 || math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("step %d cell %d: SOC %g, %g V", k, c+1, z, v)
				}
			}
		}
	})
}

// Generating text from any RE2 pattern never panics, and any text it
// returns without error matches the pattern.
func FuzzLineGen(f *testing.F) {
	for _, p := range []string{`^cell (?P<n>\d+): (?P<mv>\d+) mV$`, `(?i)a[^b]*c{2,3}|d`, `\bx\B`, `[^\x00-\x{10FFFF}]`, `(a|b)+?(?:c)*$`, `\pL\PN`} {
		f.Add(p, "12")
	}
	f.Fuzz(func(t *testing.T, pattern, fill string) {
		re, err := regexp.Compile(pattern)
		if err != nil {
			return
		}
		g, err := newLineGen(re)
		if err != nil {
			return
		}
		fills := map[int]string{}
		if re.NumSubexp() > 0 {
			fills[1] = fill
		}
		for _, fm := range []map[int]string{nil, fills} {
			s, err := g.Generate(fm)
			if err == nil && !re.MatchString(s) {
				t.Fatalf("%q generated %q, which it does not match", pattern, s)
			}
		}
	})
}
