package config

import (
	"errors"
	"flag"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite golden files")

func TestLoadExample(t *testing.T) {
	p, err := Load("examples/buoy-winch.toml")
	if err != nil {
		t.Fatal(err)
	}
	exp := p.Expanded()
	if len(exp.CAN) != 19 {
		t.Errorf("expanded CAN fields = %d, want 19 (12 cells, 4 in 0x4D0, 3 temps)", len(exp.CAN))
	}
	if len(exp.Bindings) != 19 {
		t.Errorf("bindings = %d: %v", len(exp.Bindings), exp.Bindings)
	}
	if exp.Bindings[1] != "cell[1].voltage" || exp.Bindings[12] != "cell[12].voltage" {
		t.Errorf("bindings not in natural order: %v", exp.Bindings)
	}
	if len(p.Warnings) != 0 {
		t.Errorf("example has warnings: %v", p.Warnings)
	}
}

var marker = regexp.MustCompile(`# error: ?(.*)$`)

// TestBrokenProfiles loads every profile in testdata/broken: each must fail
// with a problem on the line marked "# error: TEXT", and the problem's message
// or hint must contain TEXT. The full output is kept in a golden file.
func TestBrokenProfiles(t *testing.T) {
	files, _ := filepath.Glob("testdata/broken/*.toml")
	if len(files) < 15 {
		t.Fatalf("only %d broken profiles", len(files))
	}
	var golden strings.Builder
	for _, file := range files {
		t.Run(filepath.Base(file), func(t *testing.T) {
			data, err := os.ReadFile(file)
			if err != nil {
				t.Fatal(err)
			}
			wantLine, wantText := 0, ""
			for i, l := range strings.Split(string(data), "\n") {
				if m := marker.FindStringSubmatch(l); m != nil {
					wantLine, wantText = i+1, strings.TrimSpace(m[1])
				}
			}
			if wantLine == 0 {
				t.Fatal("no # error: marker")
			}
			_, err = Load(file)
			var le *LoadError
			if !errors.As(err, &le) {
				t.Fatalf("want a *LoadError, got %v", err)
			}
			golden.WriteString(err.Error() + "\n")
			found := false
			for _, p := range le.Problems {
				if !strings.HasPrefix(p.Error(), file+":") {
					t.Errorf("problem does not start with the file name: %s", p.Error())
				}
				if p.Pos.Line == wantLine && strings.Contains(p.Msg+" "+p.Hint, wantText) {
					found = true
				}
			}
			if !found {
				t.Errorf("want a problem at line %d containing %q; got:\n%v", wantLine, wantText, err)
			}
		})
	}
	path := "testdata/broken.golden"
	if *update {
		if err := os.WriteFile(path, []byte(golden.String()), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./config -update to create it)", err)
	}
	if string(want) != golden.String() {
		t.Errorf("output differs from %s (review, then go test ./config -update):\n%s", path, golden.String())
	}
}

func TestErrorsIs(t *testing.T) {
	_, err := Load("testdata/broken/unknown-key.toml")
	if !errors.Is(err, ErrUnknownKey) {
		t.Errorf("errors.Is(err, ErrUnknownKey) = false for %v", err)
	}
	_, err = Load("testdata/broken/overlap.toml")
	if !errors.Is(err, ErrConflict) {
		t.Errorf("errors.Is(err, ErrConflict) = false for %v", err)
	}
}

func TestWarningChemistry(t *testing.T) {
	src := `[pack]
name = "x"
cells = 4
capacity_ah = 10
chemistry = "lfp"
[limits]
cell_high_v = 4.2
cell_low_v = 2.5
[[source]]
name = "a"
kind = "socketcan"
device = "can0"
`
	p, err := Parse("w.toml", []byte(src))
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Warnings) != 1 || p.Warnings[0].Pos.Line != 7 || !strings.Contains(p.Warnings[0].Error(), "warning: cell_high_v") {
		t.Errorf("want one warning at line 7, got %v", p.Warnings)
	}
}

func TestTemplates(t *testing.T) {
	cases := []struct {
		in   string
		vars map[string]int
		want string
		err  bool
	}{
		{"cell[{3*mux+1}..{3*mux+3}].voltage", map[string]int{"mux": 2}, "cell[7].voltage cell[8].voltage cell[9].voltage", false},
		{"temp[1..3]", nil, "temp[1] temp[2] temp[3]", false},
		{"cell[{n}].voltage", map[string]int{"n": 5}, "cell[5].voltage", false},
		{"cell[{mux*2-1}].voltage", map[string]int{"mux": 3}, "cell[5].voltage", false},
		{"pack.current", nil, "pack.current", false},
		{"cell[{x}].voltage", nil, "", true},
		{"cell[3..1].voltage", nil, "", true},
		{"cell[{2*}].voltage", map[string]int{}, "", true},
	}
	for _, c := range cases {
		tm, err := parseBindTemplate(c.in)
		var got []string
		if err == nil {
			got, err = tm.expand(c.vars)
		}
		if (err != nil) != c.err {
			t.Errorf("%s: err = %v", c.in, err)
			continue
		}
		if !c.err && strings.Join(got, " ") != c.want {
			t.Errorf("%s: %v, want %s", c.in, got, c.want)
		}
	}
}

// FuzzLoad: the profile loader never panics, and every problem it reports
// has a position inside the file.
func FuzzLoad(f *testing.F) {
	files, _ := filepath.Glob("testdata/broken/*.toml")
	files = append(files, "examples/buoy-winch.toml")
	for _, file := range files {
		data, err := os.ReadFile(file)
		if err == nil {
			f.Add(data)
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		_, err := Parse("fuzz.toml", data)
		var le *LoadError
		if errors.As(err, &le) {
			lines := strings.Count(string(data), "\n") + 1
			for _, p := range le.Problems {
				if p.Pos.Line < 1 || p.Pos.Line > lines || p.Pos.Col < 1 {
					t.Fatalf("problem outside the file (%d lines): %v", lines, p)
				}
			}
		}
	})
}
