package check

import (
	"bytes"
	"flag"
	"os"
	"testing"
	"time"

	"packwatch/pack"
)

var update = flag.Bool("update", false, "rewrite golden files")

// golden compares got with testdata/name, or rewrites it with -update.
func golden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := "testdata/" + name
	if *update {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./check -run Golden -update)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs from the golden file; review with -update and git diff\n--- got\n%s", name, got)
	}
}

// goldenRecord is a saved no-go result with a previous check, from hand-built
// snapshots: a weak cell 3 and an unconfirmed checklist item.
func goldenRecord(t *testing.T) *Record {
	now := time.Unix(0, t0+10e9).Add(26 * time.Hour).UTC()
	prev := testRecord(t, nil, now.Add(-24*time.Hour))
	prev.Hash = "1111111111111111111111111111111111111111111111111111111111111111"
	r := testRecord(t, func(i int, p *pack.PackSnapshot) { p.Cells[2].V = np(3.790) }, now)
	r.Confirm(nil, "A. Operator", "pod 3, before the morning launch")
	r.Compare(prev)
	r.Raw.SHA256 = "2222222222222222222222222222222222222222222222222222222222222222"
	r.PrevHash = prev.Hash
	h, err := r.ComputeHash()
	if err != nil {
		t.Fatal(err)
	}
	r.Hash = h
	return r
}

func TestGoldenReports(t *testing.T) {
	r := goldenRecord(t)
	var text, html bytes.Buffer
	if err := WriteText(&text, r); err != nil {
		t.Fatal(err)
	}
	golden(t, "report.txt.golden", text.Bytes())
	if err := WriteHTML(&html, r); err != nil {
		t.Fatal(err)
	}
	golden(t, "report.html.golden", html.Bytes())
}

// FuzzParseRecord: any input gives a record or an error, never a panic; a
// record that parses encodes again and keeps its hash check deterministic.
func FuzzParseRecord(f *testing.F) {
	b, _ := testRecordJSON()
	f.Add(b)
	f.Add([]byte(`{"schema":"packwatch-check/1","rules":[{"id":"x","status":"pass","value":1e308}]}`))
	f.Add([]byte(`{"schema":"packwatch-check/1","changes":{"soc_pct":{"before":null}}}`))
	f.Add([]byte(`[]`))
	f.Fuzz(func(t *testing.T, data []byte) {
		r, err := ParseRecord(data)
		if err != nil {
			return
		}
		h1, err1 := r.ComputeHash()
		h2, err2 := r.ComputeHash()
		if (err1 == nil) != (err2 == nil) || h1 != h2 {
			t.Fatalf("hash not deterministic: %s %s", h1, h2)
		}
		if err1 == nil {
			r.Hash = h1
			if err := r.VerifyHash(); err != nil {
				t.Fatalf("own hash fails: %v", err)
			}
		}
		var buf bytes.Buffer
		WriteText(&buf, r)
		WriteHTML(&buf, r)
	})
}

func testRecordJSON() ([]byte, error) {
	s := testSettings()
	r := NewRecord(window(nil), Raw{Format: RawFormat}, s, Inputs{Profile: testProfile(), PackID: "pod", Now: time.Unix(0, t0)})
	return r.JSON()
}
