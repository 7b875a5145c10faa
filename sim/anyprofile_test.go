package sim

import (
	"context"
	"path/filepath"
	"testing"
	"time"

	"packwatch/config"
	"packwatch/decode"
)

// Any profile works: the generic story of every valid profile in the
// repository (the example, this package's fixtures and other packages'
// test profiles) runs, every binding it covers decodes, nothing is unknown
// or malformed, and one pass of the story ends (rest, charge with taper,
// discharge to the warning).
func TestAnyProfile(t *testing.T) {
	var paths []string
	for _, g := range []string{"../config/examples/*.toml", "testdata/*.toml", "../*/testdata/*.toml"} {
		m, _ := filepath.Glob(g)
		paths = append(paths, m...)
	}
	seen := map[string]bool{}
	ran := 0
	for _, path := range paths {
		abs, _ := filepath.Abs(path)
		if seen[abs] || filepath.Base(path) == "unwritable-line.toml" {
			continue
		}
		seen[abs] = true
		p, err := config.Load(path)
		if err != nil {
			continue // a deliberately broken profile of some test
		}
		t.Run(path, func(t *testing.T) {
			dm, err := decode.Compile(p)
			if err != nil {
				t.Fatal(err)
			}
			s, err := New(dm, Options{Speed: SpeedMax, For: 30 * time.Minute, Start: t0, Seed: 2})
			if err != nil {
				t.Fatal(err)
			}
			if l := s.StoryLength(); l >= maxStory || l < time.Hour {
				t.Errorf("generic story takes %v", l)
			}
			sink := newDecodeSink(dm)
			if err := s.Run(context.Background(), sink); err != nil {
				t.Fatal(err)
			}
			for src, c := range sink.v.Src {
				if c.Unknown != 0 || c.DecodeErrors != 0 {
					t.Errorf("source %d: %d unknown, %d decode errors", src, c.Unknown, c.DecodeErrors)
				}
			}
			for i, sl := range dm.Slots() {
				if sink.v.T[i] == 0 {
					t.Errorf("%s never decoded", sl.Name)
				}
			}
			if s.EncodeErrors() != 0 || len(s.Warnings()) != 0 {
				t.Errorf("%d encode errors, warnings %q", s.EncodeErrors(), s.Warnings())
			}
		})
		ran++
	}
	if ran < 3 {
		t.Errorf("only %d profiles found", ran)
	}
}
