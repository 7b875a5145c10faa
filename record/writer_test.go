package record

import (
	"bytes"
	"context"
	"database/sql"
	"encoding/binary"
	"errors"
	"io/fs"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"runtime"
	"strings"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
)

var testMeta = Meta{Tool: "packwatch", Version: "test", Host: "bench-1", Operator: "tester",
	Notes: "module 3 balance run", Start: time.Date(2026, 3, 14, 9, 26, 53, 589793238, time.FixedZone("X", 3600)),
	Mode: "simulated", Sources: []SourceInfo{{Index: 0, Name: "bms", Kind: "sim", Device: "sim0"},
		{Index: 1, Name: "console", Kind: "serial-text", Device: "/dev/ttyUSB1"}}}

// monotonic makes n random messages with advancing times.
func monotonic(rng *rand.Rand, n int, t0 int64) []bus.Message {
	msgs := randomBatch(rng, n, t0)
	t := t0
	for i := range msgs {
		t += 1000 + rng.Int64N(300e3)
		msgs[i].T = t
	}
	return msgs
}

func readAll(t *testing.T, r *Reader, from, to int64) []bus.Message {
	t.Helper()
	var out []bus.Message
	err := r.Scan(context.Background(), from, to, func(b []bus.Message) error {
		out = append(out, b...)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func TestWriteRead(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	w, err := Create(path, testMeta, Options{Lossless: true})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(3, 4))
	msgs := monotonic(rng, 20000, 1_773_000_000e9)
	w.Profile(msgs[0].T, "pack-a", "[pack]\nname = \"a\"\n", "abc123")
	for i := 0; i < len(msgs); i += 97 {
		w.Write(msgs[i:min(i+97, len(msgs))])
	}
	w.Event(Event{T: msgs[10].T, Kind: EventTrip, Source: 0, Text: "cell 7 high", JSON: `{"cell":7}`})
	w.Event(Event{T: msgs[5].T, Text: "operator note"})
	w.Profile(msgs[9000].T, "pack-a", "[pack]\nname = \"b\"\n", "def456")
	sec := msgs[0].T / 1e9
	w.Stats(sec, []StatRow{{Bind: "cell.max", Min: 3.9, Max: 4.1, Last: 4.0}, {Bind: "bad", Min: math.NaN()}})
	w.Stats(sec+1, []StatRow{{Bind: "cell.max", Min: 3.8, Max: 4.0, Last: 3.9}})
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatalf("second Close: %v", err)
	}
	if _, err := os.Stat(path + "-wal"); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("WAL left after a clean close: %v", err)
	}

	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if r.Recovered() != nil {
		t.Errorf("clean file: recovery %+v", r.Recovered())
	}
	m := r.Meta()
	want := testMeta
	if !m.Start.Equal(want.Start) || m.Start.Location() != time.UTC {
		t.Errorf("start %v, want %v in UTC", m.Start, want.Start)
	}
	m.Start, want.Start = time.Time{}, time.Time{}
	if !reflect.DeepEqual(m, want) {
		t.Errorf("meta %+v\nwant %+v", m, want)
	}
	got := readAll(t, r, math.MinInt64, math.MaxInt64)
	if len(got) != len(msgs) {
		t.Fatalf("%d messages, want %d", len(got), len(msgs))
	}
	for i := range msgs {
		if e := expected(msgs[i]); !reflect.DeepEqual(got[i], e) {
			t.Fatalf("message %d: %+v, want %+v", i, got[i], e)
		}
	}
	// A range in the middle: exactly the messages in [from, to).
	from, to := expected(msgs[5000]).T, expected(msgs[12345]).T
	if part := readAll(t, r, from, to); len(part) != 12345-5000 || part[0].T != from {
		t.Errorf("range: %d messages starting %d, want %d starting %d", len(part), part[0].T, 12345-5000, from)
	}
	first, last, ok, err := r.Span()
	if err != nil || !ok || first != expected(msgs[0]).T || last != expected(msgs[len(msgs)-1]).T {
		t.Errorf("span %d %d %v %v", first, last, ok, err)
	}
	if n, err := r.Count(); err != nil || n != int64(len(msgs)) {
		t.Errorf("count %d %v", n, err)
	}
	ps, err := r.Profiles()
	if err != nil || len(ps) != 2 || ps[0].Hash != "abc123" || ps[1].T != msgs[9000].T || ps[1].Text != "[pack]\nname = \"b\"\n" {
		t.Errorf("profiles %+v %v", ps, err)
	}
	evs, err := r.Events()
	wantEv := []Event{{T: msgs[5].T, Kind: EventNote, Source: 0, Text: "operator note"},
		{T: msgs[10].T, Kind: EventTrip, Source: 0, Text: "cell 7 high", JSON: `{"cell":7}`}}
	if err != nil || !reflect.DeepEqual(evs, wantEv) {
		t.Errorf("events %+v %v\nwant %+v", evs, err, wantEv)
	}
	st, err := r.Stats("cell.max", sec*1e9, (sec+1)*1e9)
	if err != nil || !reflect.DeepEqual(st, []StatPoint{{Sec: sec, Min: 3.9, Max: 4.1, Last: 4.0}}) {
		t.Errorf("stats %+v %v", st, err)
	}
	if b, err := r.Binds(); err != nil || !reflect.DeepEqual(b, []string{"cell.max"}) {
		t.Errorf("binds %v %v (NaN row must be skipped)", b, err)
	}
	ss, err := r.Sessions()
	if err != nil || len(ss) != 1 || ss[0].Closed == "" || ss[0].Messages != int64(len(msgs)) {
		t.Errorf("sessions %+v %v", ss, err)
	}
}

func TestCreateExisting(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "s.db")
	os.WriteFile(path, []byte("keep me"), 0o644)
	if _, err := Create(path, testMeta, Options{}); !errors.Is(err, fs.ErrExist) {
		t.Fatalf("existing file: %v, want ErrExist", err)
	}
	if b, _ := os.ReadFile(path); string(b) != "keep me" {
		t.Fatal("refused file was changed")
	}
	w, err := Create(path, testMeta, Options{Force: true})
	if err != nil {
		t.Fatal(err)
	}
	msg := []bus.Message{{T: 1e18, Kind: bus.KindLine, Text: "first"}}
	w.Write(msg)
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	// Append continues with a second session.
	m2 := testMeta
	m2.Sources = append(m2.Sources, SourceInfo{Index: 2, Name: "shunt", Kind: "serial-can", Device: "/dev/ttyACM0"})
	w, err = Create(path, m2, Options{Append: true})
	if err != nil {
		t.Fatal(err)
	}
	msg[0].T, msg[0].Text = 2e18, "second"
	w.Write(msg)
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	got := readAll(t, r, math.MinInt64, math.MaxInt64)
	if len(got) != 2 || got[0].Text != "first" || got[1].Text != "second" {
		t.Errorf("after append: %+v", got)
	}
	if ss, _ := r.Sessions(); len(ss) != 2 {
		t.Errorf("%d sessions, want 2", len(ss))
	}
	if len(r.Meta().Sources) != 3 {
		t.Errorf("sources %+v", r.Meta().Sources)
	}
	if _, err := Create(filepath.Join(dir, "none.db"), testMeta, Options{Append: true}); err == nil {
		t.Error("append to a missing file succeeded")
	}
}

func TestCreateUnwritable(t *testing.T) {
	_, err := Create(filepath.Join(t.TempDir(), "no", "such", "dir", "s.db"), testMeta, Options{})
	if err == nil || !strings.Contains(err.Error(), "create recording") {
		t.Fatalf("got %v", err)
	}
}

func TestOpenRefuses(t *testing.T) {
	dir := t.TempDir()
	foreign := filepath.Join(dir, "other.db")
	db, err := sql.Open("sqlite", foreign)
	if err != nil {
		t.Fatal(err)
	}
	db.Exec("CREATE TABLE t(x)")
	db.Close()
	foreignBytes, _ := os.ReadFile(foreign)

	newer := filepath.Join(dir, "newer.db")
	w, err := Create(newer, testMeta, Options{})
	if err != nil {
		t.Fatal(err)
	}
	w.Close()
	b, _ := os.ReadFile(newer)
	binary.BigEndian.PutUint32(b[60:], SchemaVersion+1)
	os.WriteFile(newer, b, 0o644)

	files := map[string][]byte{"text.db": []byte("id,value\n1,2\n"), "empty.db": nil,
		"short.db": []byte("SQLite format 3\x00")}
	for n, c := range files {
		os.WriteFile(filepath.Join(dir, n), c, 0o644)
	}
	tests := []struct {
		file string
		want error
	}{
		{"text.db", ErrForeign}, {"empty.db", ErrForeign}, {"short.db", ErrForeign},
		{"other.db", ErrForeign}, {"newer.db", ErrNewer}, {"missing.db", fs.ErrNotExist},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			r, err := Open(filepath.Join(dir, tt.file))
			if err == nil {
				r.Close()
			}
			if !errors.Is(err, tt.want) || !strings.Contains(err.Error(), tt.file) {
				t.Fatalf("got %v, want %v naming the file", err, tt.want)
			}
		})
	}
	if b, _ := os.ReadFile(foreign); !bytes.Equal(b, foreignBytes) {
		t.Error("a foreign database was changed by Open")
	}
	if _, err := os.Stat(foreign + "-wal"); err == nil {
		t.Error("a foreign database got a WAL")
	}
	if _, err := os.Stat(filepath.Join(dir, "missing.db")); err == nil {
		t.Error("Open created a missing file")
	}
}

// TestDiskFull fills a size-limited file: recording stops with a clear
// error, Write keeps returning at once, what was committed stays readable.
// A queue of two blocks (about 50 KB each here) keeps every transaction far
// below the 1 MB limit, so some commits succeed before one fails.
func TestDiskFull(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	w, err := Create(path, testMeta, Options{Lossless: true, MaxBytes: 1 << 20, QueueBlocks: 2, CommitBlocks: 1})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(5, 6))
	batch := make([]bus.Message, 64)
	var n int
	for ; n < 1e7 && w.Err() == nil; n += len(batch) {
		for i := range batch {
			batch[i] = bus.Message{T: int64(n+i) * 1e6, Kind: bus.KindCAN, Frame: can.Frame{ID: 0x100, Length: 8}}
			binary.LittleEndian.PutUint64(batch[i].Frame.Data[:], rng.Uint64()) // incompressible
		}
		w.Write(batch)
	}
	werr := w.Err()
	if werr == nil || !strings.Contains(werr.Error(), "disk full") {
		t.Fatalf("Err after %d frames: %v", n, werr)
	}
	before := w.Dropped()
	w.Write(batch) // must not block or panic
	if w.Dropped() != before+uint64(len(batch)) {
		t.Errorf("dropped %d, want %d", w.Dropped(), before+uint64(len(batch)))
	}
	committed, _ := w.Committed()
	if err := w.Close(); !errors.Is(err, werr) && err.Error() != werr.Error() {
		t.Errorf("Close: %v, want %v", err, werr)
	}
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	got := readAll(t, r, math.MinInt64, math.MaxInt64)
	if uint64(len(got)) != committed || committed == 0 {
		t.Fatalf("%d messages in the file, %d committed", len(got), committed)
	}
	for i, m := range got {
		if m.T != int64(i)*1e6 {
			t.Fatalf("message %d at %d: not a prefix", i, m.T)
		}
	}
}

// TestOverrun: with the writer goroutine held off (no tick, no kick), a
// one-block queue drops the next block, counts it and notes an overrun.
func TestOverrun(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	w, err := Create(path, testMeta, Options{QueueBlocks: 1, CommitEvery: time.Hour, CommitBlocks: 1000})
	if err != nil {
		t.Fatal(err)
	}
	msgs := make([]bus.Message, 3*MaxBlockMessages+10)
	for i := range msgs {
		msgs[i] = bus.Message{T: int64(i) * 1e6, Kind: bus.KindCAN, Frame: can.Frame{ID: 0x200, Length: 1, Data: can.Data{byte(i)}}}
	}
	w.Write(msgs)
	if d := w.Dropped(); d != 2*MaxBlockMessages {
		t.Errorf("dropped %d, want %d", d, 2*MaxBlockMessages)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	got := readAll(t, r, math.MinInt64, math.MaxInt64)
	if len(got) != MaxBlockMessages+10 || got[MaxBlockMessages].T != msgs[3*MaxBlockMessages].T {
		t.Errorf("%d messages kept", len(got))
	}
	evs, _ := r.Events()
	if len(evs) != 1 || evs[0].Kind != EventOverrun || evs[0].T != msgs[MaxBlockMessages].T ||
		!strings.Contains(evs[0].Text, "dropped 8192 messages in 2 blocks") {
		t.Errorf("events %+v", evs)
	}
	if ss, _ := r.Sessions(); ss[0].Dropped != 2*MaxBlockMessages {
		t.Errorf("session dropped %d", ss[0].Dropped)
	}
}

// TestRecoveryNoted: a session left open by a writer that is gone gets one
// recovery event on the next open, and only one.
func TestRecoveryNoted(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	w, err := Create(path, testMeta, Options{})
	if err != nil {
		t.Fatal(err)
	}
	w.Write([]bus.Message{{T: 7e18, Kind: bus.KindLine, Text: "x"}})
	w.Close()
	// Make it look like a writer that died long ago.
	db, _ := sql.Open("sqlite", path)
	if _, err := db.Exec("UPDATE sessions SET closed=NULL, heartbeat=0"); err != nil {
		t.Fatal(err)
	}
	db.Close()
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	ev := r.Recovered()
	if ev == nil || ev.Kind != EventRecovery || ev.T != 7e18 {
		t.Fatalf("recovery %+v", ev)
	}
	r.Close()
	r, err = Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if r.Recovered() != nil {
		t.Error("recovery noted twice")
	}
	evs, _ := r.Events()
	if len(evs) != 1 || evs[0].Kind != EventRecovery {
		t.Errorf("events %+v", evs)
	}
}

// TestConcurrentLossless: several goroutines writing through a one-block
// queue with a fast tick (so that the tick seals blocks while writers wait
// for room) lose nothing and duplicate nothing.
func TestConcurrentLossless(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	w, err := Create(path, testMeta, Options{Lossless: true, QueueBlocks: 1, CommitEvery: time.Millisecond, CommitBlocks: 1})
	if err != nil {
		t.Fatal(err)
	}
	const writers, each = 3, 30000
	done := make(chan struct{})
	for g := range writers {
		go func() {
			defer func() { done <- struct{}{} }()
			batch := make([]bus.Message, 50)
			for i := 0; i < each; i += len(batch) {
				for j := range batch {
					batch[j] = bus.Message{T: int64(i+j) * 1e6, Src: uint16(g), Kind: bus.KindCAN,
						Frame: can.Frame{ID: 0x100, Length: 4}}
					binary.LittleEndian.PutUint32(batch[j].Frame.Data[:], uint32(i+j))
				}
				w.Write(batch)
			}
		}()
	}
	for range writers {
		<-done
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if d := w.Dropped(); d != 0 {
		t.Fatalf("lossless writer dropped %d", d)
	}
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	seen := make([][]bool, writers)
	for g := range seen {
		seen[g] = make([]bool, each)
	}
	for _, m := range readAll(t, r, math.MinInt64, math.MaxInt64) {
		i := binary.LittleEndian.Uint32(m.Frame.Data[:])
		if int(m.Src) >= writers || i >= each || seen[m.Src][i] {
			t.Fatalf("unexpected or duplicate message src %d seq %d", m.Src, i)
		}
		seen[m.Src][i] = true
	}
	for g := range seen {
		for i, ok := range seen[g] {
			if !ok {
				t.Fatalf("src %d seq %d missing", g, i)
			}
		}
	}
}

// TestCheckFindsDamage: Check passes a good file and finds a damaged block
// that Open alone does not read.
func TestCheckFindsDamage(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	w, err := Create(path, testMeta, Options{})
	if err != nil {
		t.Fatal(err)
	}
	w.Write(packTraffic(3*MaxBlockMessages, 7))
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := r.Check(context.Background()); err != nil {
		t.Fatalf("good file: %v", err)
	}
	r.Close()
	// Damage one byte inside the second block's data, through SQLite so
	// that only the blob is wrong.
	db, _ := sql.Open("sqlite", path)
	if _, err := db.Exec("UPDATE blocks SET data = substr(data, 1, 100) || x'ee' || substr(data, 102) WHERE id = 2"); err != nil {
		t.Fatal(err)
	}
	db.Close()
	r, err = Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if err := r.Check(context.Background()); !errors.Is(err, ErrCorrupt) || !strings.Contains(err.Error(), "block 2") {
		t.Errorf("Check: %v", err)
	}
	err = r.Scan(context.Background(), math.MinInt64, math.MaxInt64, func([]bus.Message) error { return nil })
	if !errors.Is(err, ErrCorrupt) {
		t.Errorf("Scan: %v", err)
	}
}

// TestBusy: a second writer is refused while the first records; a reader
// opens the file meanwhile without noting a recovery.
func TestBusy(t *testing.T) {
	path := filepath.Join(t.TempDir(), "s.db")
	w, err := Create(path, testMeta, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	if _, err := Create(path, testMeta, Options{Append: true}); !errors.Is(err, ErrBusy) {
		t.Fatalf("second writer: %v, want ErrBusy", err)
	}
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if r.Recovered() != nil {
		t.Error("recovery noted for a file being written")
	}
}

// TestOddPath: characters that mean something in a SQLite URI (space, %,
// #, ?) and non-ASCII letters reach the right file.
func TestOddPath(t *testing.T) {
	name := "rec 50% #1 ?x Zelle ä.db"
	if runtime.GOOS == "windows" {
		name = "rec 50% #1 Zelle ä.db" // ? is not allowed in Windows names
	}
	path := filepath.Join(t.TempDir(), name)
	w, err := Create(path, testMeta, Options{})
	if err != nil {
		t.Fatal(err)
	}
	w.Write([]bus.Message{{T: 1, Kind: bus.KindLine, Text: "x"}})
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	entries, _ := os.ReadDir(filepath.Dir(path))
	if len(entries) != 1 || entries[0].Name() != name {
		t.Fatalf("directory holds %v, want only %q", entries, name)
	}
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if n, _ := r.Count(); n != 1 {
		t.Errorf("%d messages", n)
	}
}
