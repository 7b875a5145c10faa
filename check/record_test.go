package check

import (
	"context"
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"errors"
	"math"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"packwatch/config"
	"packwatch/pack"
)

func testProfile() *config.Profile {
	return &config.Profile{Pack: config.Pack{Name: "Test pod", Cells: 4, CapacityAh: 50},
		File: "testdata/pod.toml", Hash: strings.Repeat("ab", 32)}
}

func testRecord(t *testing.T, mod func(i int, p *pack.PackSnapshot), now time.Time) *Record {
	t.Helper()
	s := testSettings()
	s.Manual = []string{"connector latched and locked"}
	return NewRecord(window(mod), Raw{Format: RawFormat, Messages: 1000}, s, Inputs{Profile: testProfile(), PackID: "pod",
		Operator: "A. Operator", PackSerial: "POD-7", Data: DataInfo{Mode: ModeCapture, Source: "capture x"},
		Confirmed: []bool{true}, Now: now})
}

func TestRecordFields(t *testing.T) {
	now := time.Unix(0, t0+10e9).Add(3 * time.Hour)
	r := testRecord(t, nil, now)
	if r.Verdict != VerdictGo {
		t.Fatalf("verdict %s: %+v", r.Verdict, Sorted(r.Rules)[0])
	}
	if r.Pack.Key != "serial:POD-7" || r.Pack.SerialFrom != "operator" {
		t.Errorf("pack %+v", r.Pack)
	}
	// A capture checked 3 h after its end says so (age in seconds: 3 × 3600).
	if r.Data.AgeS == nil || *r.Data.AgeS != 10800 || !strings.Contains(r.Data.Notice, "FROM A CAPTURE, NOT LIVE: the data is 3.0 h old") {
		t.Errorf("data %+v notice %q", r.Data.AgeS, r.Data.Notice)
	}
	if r.Data.Seconds != 10 || r.Time != now.UTC().Format(time.RFC3339) {
		t.Errorf("seconds %v time %s", r.Data.Seconds, r.Time)
	}
	if r.Measured.SpreadV == nil || math.Abs(float64(*r.Measured.SpreadV)-0.021) > 1e-9 {
		t.Errorf("spread %v", r.Measured.SpreadV)
	}
	// A bms-reported serial wins over the operator's.
	r2 := testRecord(t, func(i int, p *pack.PackSnapshot) { p.Serial = "4711" }, now)
	if r2.Pack.Serial != "4711" || r2.Pack.SerialFrom != "bms" {
		t.Errorf("pack %+v", r2.Pack)
	}
	// Unticking the manual item makes it a no-go.
	if err := r.Confirm(nil, "B. Other", "note"); err != nil || r.Verdict != VerdictNoGo {
		t.Errorf("confirm: %v, verdict %s", err, r.Verdict)
	}
	// No message at all: could not check.
	r3 := NewRecord(Window{From: t0, To: t0 + 10e9}, Raw{}, testSettings(), Inputs{Profile: testProfile(), Now: now, Data: DataInfo{Mode: ModeLive}})
	if r3.Verdict != VerdictCouldNotCheck || r3.Data.Notice != "" {
		t.Errorf("empty window: %s %q", r3.Verdict, r3.Data.Notice)
	}
}

// Check values from the FreedomCAR Battery Test Manual (DOE/ID-11069, INL
// 2003; details from memory, see REFERENCES.md): 3.700 → 3.550 V at a 50 A
// discharge pulse is 3.00 mΩ; a 37.5 A regen pulse 3.690 → 3.795 V is 2.80 mΩ.
func TestResistanceHPPC(t *testing.T) {
	mk := func(i1, v1, i2, v2 float64) []Sample {
		return []Sample{{T: t0, Pack: pack.PackSnapshot{Current: np(i1), Voltage: np(v1)}},
			{T: t0 + 1e9, Pack: pack.PackSnapshot{Current: np(i2), Voltage: np(v2)}}}
	}
	cases := []struct {
		name string
		s    []Sample
		want float64
		ok   bool
	}{
		{"discharge pulse", mk(0, 3.700, -50, 3.550), 3.00, true}, // positive current charges
		{"regen pulse", mk(0, 3.690, 37.5, 3.795), 2.80, true},
		{"step too small", mk(0, 3.700, -2, 3.694), 0, false},
		{"no voltage", []Sample{{Pack: pack.PackSnapshot{Current: np(0)}}, {Pack: pack.PackSnapshot{Current: np(-50)}}}, 0, false},
	}
	for _, c := range cases {
		got, ok := Resistance(c.s)
		if ok != c.ok || math.Abs(got-c.want) > 1e-9 {
			t.Errorf("%s: %v %v, want %v %v", c.name, got, ok, c.want, c.ok)
		}
	}
}

func TestCanonicalRoundTrip(t *testing.T) {
	r := testRecord(t, func(i int, p *pack.PackSnapshot) {
		p.Cells[0].V = np(3.9250000000000003) // binary noise of scaling
	}, time.Unix(0, t0))
	r.Hash = ""
	h1, err := r.ComputeHash()
	if err != nil {
		t.Fatal(err)
	}
	r.Hash = h1
	b, err := r.JSON()
	if err != nil {
		t.Fatal(err)
	}
	back, err := ParseRecord(b)
	if err != nil {
		t.Fatal(err)
	}
	if err := back.VerifyHash(); err != nil {
		t.Fatalf("a record read back from its JSON fails its hash: %v", err)
	}
	back.Rules[0].Reason += "."
	if err := back.VerifyHash(); !errors.Is(err, ErrTampered) {
		t.Fatalf("an edited record passes: %v", err)
	}
}

func TestHistoryChainAndTamper(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "sub", "checks.db")
	h, err := OpenHistory(path)
	if err != nil {
		t.Fatal(err)
	}
	defer h.Close()
	now := time.Unix(0, t0)
	var hashes []string
	for i := 0; i < 4; i++ {
		var mod func(int, *pack.PackSnapshot)
		if i == 2 {
			mod = func(_ int, p *pack.PackSnapshot) { p.SOC.Pct = np(10) }
		}
		r := testRecord(t, mod, now.Add(time.Duration(i)*time.Hour))
		prev, err := h.Last(ctx, r.Pack.Key)
		if err != nil {
			t.Fatal(err)
		}
		r.Compare(prev)
		if err := h.Save(ctx, r); err != nil {
			t.Fatal(err)
		}
		if i > 0 && (r.PrevHash != hashes[i-1] || r.Changes == nil || r.Changes.PreviousHash != hashes[i-1]) {
			t.Fatalf("record %d not chained: %+v", i, r.Changes)
		}
		hashes = append(hashes, r.Hash)
	}
	// SOC 72 % → 10 %: change −62 points (arithmetic).
	got, err := h.Get(ctx, hashes[2][:10])
	if err != nil {
		t.Fatal(err)
	}
	if got.Changes == nil || got.Changes.SOCPct.Change == nil || *got.Changes.SOCPct.Change != -62 || got.Verdict != VerdictNoGo {
		t.Fatalf("changes %+v verdict %s", got.Changes, got.Verdict)
	}
	list, err := h.List(ctx, "serial:POD-7", 0)
	if err != nil || len(list) != 4 || list[0].Hash != hashes[3] || len(list[1].Failing) != 1 || list[1].Failing[0] != "State of charge" {
		t.Fatalf("list %v %+v", err, list)
	}
	if n, head, probs, err := h.Verify(ctx); err != nil || n != 4 || head != hashes[3] || len(probs) != 0 {
		t.Fatalf("clean chain: %d %s %v %v", n, head, probs, err)
	}

	// Edit a stored record directly in the database (a verdict changed to go).
	db, err := sql.Open("sqlite", path)
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if _, err := db.Exec(`UPDATE checks SET record = replace(record, '"verdict":"no-go"', '"verdict":"go"'), verdict = 'go' WHERE hash = ?`, hashes[2]); err != nil {
		t.Fatal(err)
	}
	_, _, probs, err := h.Verify(ctx)
	if err != nil || len(probs) != 1 || !strings.Contains(probs[0].Text, "content does not match its hash") {
		t.Fatalf("edited record: %v %+v", err, probs)
	}
	// Remove a record from the middle.
	if _, err := db.Exec(`DELETE FROM checks WHERE hash = ?`, hashes[1]); err != nil {
		t.Fatal(err)
	}
	_, _, probs, _ = h.Verify(ctx)
	var missing bool
	for _, p := range probs {
		missing = missing || strings.Contains(p.Text, "missing or was changed")
	}
	if !missing {
		t.Fatalf("removed record not detected: %+v", probs)
	}
	// A saved record cannot be confirmed again.
	r, _ := h.Get(ctx, hashes[3])
	if err := r.Confirm(nil, "x", ""); err == nil {
		t.Error("a saved record was changed")
	}
	if _, err := h.Get(ctx, "zz"); !errors.Is(err, ErrNotFound) {
		t.Errorf("bad hash: %v", err)
	}
}

func TestNoticeAndSimulatedCapture(t *testing.T) {
	for _, c := range []struct {
		text string
		want bool
	}{
		{"# start 2026-05-01T08:00:00Z\n# simulated by packwatch: invented data\n0.0 bms can 100 00\n", true},
		{"# simulated\n", true},
		{"# start 2026-05-01T08:00:00Z\n0.0 bms can 100 00\n# simulated later is data, not header\n", false},
		{"", false},
	} {
		if got := simulatedCapture([]byte(c.text)); got != c.want {
			t.Errorf("%q: %v", c.text, got)
		}
	}
	// Data ending 90 s after the check's time.
	r := testRecord(t, nil, time.Unix(0, t0+10e9).Add(-90*time.Second))
	if r.Data.AgeS != nil || !strings.Contains(r.Data.Notice, "the data's end is 90 s after the check's time") {
		t.Errorf("future data: %v %q", r.Data.AgeS, r.Data.Notice)
	}
	r = NewRecord(window(nil), Raw{}, testSettings(), Inputs{Profile: testProfile(), Now: time.Unix(0, t0),
		Data: DataInfo{Mode: ModeCapture, Simulated: true}})
	if !strings.HasPrefix(r.Data.Notice, "FROM A CAPTURE, NOT LIVE, SIMULATED DATA") {
		t.Errorf("notice %q", r.Data.Notice)
	}
}

// Two handles on one history file (two packwatch processes) saving at once
// keep one unbroken chain: each save reads the head inside its transaction.
func TestHistoryConcurrentSaves(t *testing.T) {
	ctx := context.Background()
	path := filepath.Join(t.TempDir(), "checks.db")
	var hs [2]*History
	for i := range hs {
		h, err := OpenHistory(path)
		if err != nil {
			t.Fatal(err)
		}
		defer h.Close()
		hs[i] = h
	}
	var wg sync.WaitGroup
	errs := make(chan error, 16)
	for i := 0; i < 16; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs <- hs[i%2].Save(ctx, testRecord(t, nil, time.Unix(0, t0).Add(time.Duration(i)*time.Minute)))
		}()
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		if err != nil {
			t.Fatal(err)
		}
	}
	n, _, probs, err := hs[0].Verify(ctx)
	if err != nil || n != 16 || len(probs) != 0 {
		t.Fatalf("%d records, problems %+v, %v", n, probs, err)
	}
}

// The stored compact JSON is the canonical form plus the hash key at its
// end: stripping `,"hash":"…"` gives the bytes the hash is taken over, so
// a record can be checked without packwatch (schema.json says so).
func TestHashOfStoredJSON(t *testing.T) {
	r := testRecord(t, nil, time.Unix(0, t0))
	h, _ := r.ComputeHash()
	r.Hash = h
	b, err := jsonOf(r)
	if err != nil {
		t.Fatal(err)
	}
	suffix := `,"hash":"` + h + `"}`
	if !strings.HasSuffix(string(b), suffix) {
		t.Fatalf("stored JSON does not end with the hash: %s", b[len(b)-90:])
	}
	canon := strings.TrimSuffix(string(b), suffix) + "}"
	sum := sha256.Sum256([]byte(canon))
	if hex.EncodeToString(sum[:]) != h {
		t.Fatal("the hash is not the SHA-256 of the JSON without its hash key")
	}
}

// A path that names another SQLite database (a recording) is refused and
// left unchanged.
func TestHistoryRefusesForeign(t *testing.T) {
	path := filepath.Join(t.TempDir(), "other.db")
	db, err := sql.Open("sqlite", path)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := db.Exec("CREATE TABLE blocks (id INTEGER)"); err != nil {
		t.Fatal(err)
	}
	db.Close()
	if _, err := OpenHistory(path); !errors.Is(err, ErrForeign) {
		t.Fatalf("foreign database: %v", err)
	}
	db, err = sql.Open("sqlite", path)
	if err != nil {
		t.Fatal(err)
	}
	var mode string
	if err := db.QueryRow("PRAGMA journal_mode").Scan(&mode); err != nil || mode != "delete" {
		t.Errorf("the foreign database's journal mode became %q (%v)", mode, err)
	}
	db.Close()
	h, err := OpenHistory(filepath.Join(t.TempDir(), "new.db"))
	if err != nil {
		t.Fatal(err)
	}
	h.Close()
	if h, err = OpenHistory(h.Path()); err != nil {
		t.Fatalf("reopen: %v", err)
	}
	h.Close()
}
