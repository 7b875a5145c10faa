package record

import (
	"bytes"
	"context"
	"database/sql"
	"flag"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"packwatch/bus"
)

var update = flag.Bool("update", false, "rewrite testdata/v1.db and testdata/v1.golden")

// writeFixture makes the schema-1 fixture: demo pack traffic, a line
// console, two profile versions, events of several kinds and stats.
func writeFixture(path string) error {
	os.Remove(path)
	meta := Meta{Tool: "packwatch", Version: "0.1.0-fixture", Host: "bench-1", Operator: "fixture",
		Notes: "invented demo pack, 12 cells", Start: time.Unix(1_773_000_000, 0), Mode: "simulated",
		Sources: []SourceInfo{{0, "bms", "sim", "sim0"}, {1, "console", "serial-text", "/dev/ttyUSB1"}}}
	w, err := Create(path, meta, Options{})
	if err != nil {
		return err
	}
	msgs := packTraffic(5000, 42)
	msgs[100] = bus.Message{T: msgs[100].T, Src: 1, Kind: bus.KindLine, Text: "BAL ON 7"}
	msgs[2000] = bus.Message{T: msgs[2000].T, Src: 0, Kind: bus.KindGap, Text: "reconnect"}
	w.Profile(msgs[0].T, "demo", "[pack]\nname = \"demo\"\ncells = 12\n", "h1")
	w.Write(msgs)
	w.Profile(msgs[3000].T, "demo", "[pack]\nname = \"demo\"\ncells = 12\n# v2\n", "h2")
	w.Event(Event{T: msgs[0].T, Kind: EventConnect, Source: 0, Text: "sim connected"})
	w.Event(Event{T: msgs[2000].T, Kind: EventGap, Source: 0, Text: "reconnect", JSON: `{"seconds":0.2}`})
	w.Event(Event{T: msgs[4000].T, Kind: EventWarn, Source: NoSource, Text: "cell 7 high"})
	sec := msgs[0].T / 1e9
	w.Stats(sec, []StatRow{{"cell.max", 3.71, 3.72, 3.715}})
	return w.Close()
}

// dump describes a recording in text: everything but the raw messages,
// then the first messages, the count and a checksum of all.
func dump(t *testing.T, r *Reader) string {
	var b strings.Builder
	m := r.Meta()
	fmt.Fprintf(&b, "meta %s %s %s %s %q %s %s\n", m.Tool, m.Version, m.Host, m.Operator, m.Notes, m.Start.Format(time.RFC3339Nano), m.Mode)
	for _, s := range m.Sources {
		fmt.Fprintf(&b, "source %+v\n", s)
	}
	ps, err := r.Profiles()
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range ps {
		fmt.Fprintf(&b, "profile %d %s %s %q\n", p.T, p.Name, p.Hash, p.Text)
	}
	evs, err := r.Events()
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range evs {
		fmt.Fprintf(&b, "event %+v\n", e)
	}
	st, err := r.Stats("cell.max", math.MinInt64, math.MaxInt64)
	if err != nil {
		t.Fatal(err)
	}
	fmt.Fprintf(&b, "stats cell.max %+v\n", st)
	first, last, _, err := r.Span()
	if err != nil {
		t.Fatal(err)
	}
	fmt.Fprintf(&b, "span %d %d\n", first, last)
	crc := crc32.NewIEEE()
	n := 0
	err = r.Scan(context.Background(), math.MinInt64, math.MaxInt64, func(batch []bus.Message) error {
		for _, m := range batch {
			line := fmt.Sprintf("%d %d %s %x %d %x %v %v %q\n", m.T, m.Src, m.Kind, m.Frame.ID, m.Frame.Length,
				m.Frame.Data[:], m.Frame.IsExtended, m.Frame.IsRemote, m.Text)
			io.WriteString(crc, line)
			if n < 12 || n == 100 || n == 2000 {
				b.WriteString("msg " + line)
			}
			n++
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	fmt.Fprintf(&b, "messages %d crc32 %08x\n", n, crc.Sum32())
	return b.String()
}

// TestGoldenV1 reads the committed schema-1 fixture: the reader must keep
// reading it the same way, and the encoder must still produce its blocks
// byte for byte. go test -run GoldenV1 -update rewrites both files.
func TestGoldenV1(t *testing.T) {
	if *update {
		if err := writeFixture("testdata/v1.db"); err != nil {
			t.Fatal(err)
		}
	}
	src, err := os.ReadFile("testdata/v1.db")
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "v1.db")
	if err := os.WriteFile(path, src, 0o644); err != nil {
		t.Fatal(err)
	}
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if err := r.Check(context.Background()); err != nil {
		t.Fatal(err)
	}
	got := dump(t, r)
	if *update {
		if err := os.WriteFile("testdata/v1.golden", []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile("testdata/v1.golden")
	if err != nil {
		t.Fatal(err)
	}
	if got != string(want) {
		t.Errorf("reading testdata/v1.db changed:\n%s\nwant:\n%s", got, want)
	}

	// Re-encode what was read: the same blocks, byte for byte.
	db, err := sql.Open("sqlite", dsn(path, "ro", nil))
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	rows, err := db.Query("SELECT data FROM blocks ORDER BY id")
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	var stored [][]byte
	var all []bus.Message
	var d blockDecoder
	for rows.Next() {
		var blob []byte
		if err := rows.Scan(&blob); err != nil {
			t.Fatal(err)
		}
		stored = append(stored, blob)
		if all, err = d.decode(blob, all); err != nil {
			t.Fatal(err)
		}
	}
	again := encodeAll(all)
	if len(again) != len(stored) {
		t.Fatalf("%d blocks re-encoded, %d stored", len(again), len(stored))
	}
	for i := range again {
		if !bytes.Equal(again[i], stored[i]) {
			t.Errorf("block %d encodes differently now", i+1)
		}
	}
}
