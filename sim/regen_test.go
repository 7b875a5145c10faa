package sim

import (
	"regexp"
	"testing"
)

// Text generated from an RE2 pattern matches the pattern and puts each
// filled-in text into its group.
func TestLineGen(t *testing.T) {
	cases := []struct {
		pattern string
		fill    map[string]string
		want    string
	}{
		{`^cell (?P<n>\d+): (?P<mv>\d+) mV$`, map[string]string{"n": "7", "mv": "3912"}, "cell 7: 3912 mV"},
		{`^T(?P<i>\d{2})=(?P<c>-?\d+\.\d)C\s*$`, map[string]string{"i": "03", "c": "-4.5"}, "T03=-4.5C"},
		{`(?i)^volt(?:age)?s?\s+(?P<v>[0-9.]+)`, map[string]string{"v": "3.70"}, "volt 3.70"},
		{`^(?:BMS|bms)>\s*soc=(?P<soc>\d+)%\s+\[(?P<st>[A-Z]+)\]$`, map[string]string{"soc": "55"}, "BMS>soc=55% [A]"},
		{`^\w+ (?P<x>0x[0-9a-f]+) [^,]+,\S{2,3}$`, map[string]string{"x": "0x1f"}, "0 0x1f 0,00"},
		{`^cell\[(?P<n>\d+)\]\.v = (?P<v>\d+)(?: mV)?$`, map[string]string{"n": "12", "v": "4100"}, "cell[12].v = 4100"},
	}
	for _, c := range cases {
		re := regexp.MustCompile(c.pattern)
		g, err := newLineGen(re)
		if err != nil {
			t.Fatal(err)
		}
		fill := map[int]string{}
		for name, text := range c.fill {
			fill[re.SubexpIndex(name)] = text
		}
		got, err := g.Generate(fill)
		if err != nil {
			t.Errorf("%s: %v", c.pattern, err)
			continue
		}
		if got != c.want {
			t.Errorf("%s: generated %q, want %q", c.pattern, got, c.want)
		}
	}
	// a filled text its group cannot hold is refused, not written
	re := regexp.MustCompile(`^cell (?P<n>\d+): (?P<mv>\d+) mV$`)
	g, _ := newLineGen(re)
	if _, err := g.Generate(map[int]string{2: "-5"}); err == nil {
		t.Error("a negative number in a \\d+ group was accepted")
	}
	if g.Fits(2, "3.5") || !g.Fits(2, "35") {
		t.Error("Fits is wrong for \\d+")
	}
}

func TestFormatFor(t *testing.T) {
	re := regexp.MustCompile(`^a (?P<i>\d+) b (?P<d>-?\d+\.\d{2}) c (?P<h>0x[0-9A-F]+) d (?P<u>\d+) e (?P<f>[0-9.]+)$`)
	g, _ := newLineGen(re)
	for _, c := range []struct {
		group int
		num   float64
		want  string
		ok    bool
	}{
		{1, 3912.4, "3912", true},
		{2, -4.567, "-4.57", true},
		{2, 3.7, "3.70", true},
		{3, 255, "0xFF", true},
		{4, -3, "0", true}, // a group without a sign takes 0 for a negative value
		{5, 3.7, "3.7", true},
		{5, 3.61234567, "3.612346", true}, // the most precise form the group takes
		{5, 4, "4", true},
	} {
		got, ok := formatFor(g, c.group, c.num)
		if got != c.want || ok != c.ok {
			t.Errorf("group %d, %g: %q %v, want %q %v", c.group, c.num, got, ok, c.want, c.ok)
		}
	}
	re = regexp.MustCompile(`^x (?P<w>[a-z]+)$`)
	g, _ = newLineGen(re)
	if _, ok := formatFor(g, 1, 5); ok {
		t.Error("a number was written into a letters-only group")
	}
}

// A pattern the generator cannot satisfy is reported, not silently skipped.
func TestEncoderWarnsOnUnwritableLine(t *testing.T) {
	dm := loadMap(t, "testdata/unwritable-line.toml")
	enc, err := NewEncoder(dm)
	if err != nil {
		t.Fatal(err)
	}
	if len(enc.Warnings()) != 1 {
		t.Fatalf("warnings %q, want one", enc.Warnings())
	}
	good := loadMap(t, buoyProfile)
	if enc, _ := NewEncoder(good); len(enc.Warnings()) != 0 {
		t.Errorf("warnings for the example profile: %q", enc.Warnings())
	}
}

func TestFormatIndex(t *testing.T) {
	re := regexp.MustCompile(`^C(?P<n>\d{2}) T(?P<m>\d{3})? X(?P<k>\d+)$`)
	g, _ := newLineGen(re)
	for _, c := range []struct {
		group, idx int
		want       string
	}{{1, 3, "03"}, {1, 12, "12"}, {2, 7, "007"}, {3, 7, "7"}, {3, 123, "123"}} {
		if got := formatIndex(g, c.group, c.idx); got != c.want {
			t.Errorf("group %d index %d: %q, want %q", c.group, c.idx, got, c.want)
		}
	}
}
