package record

import (
	"context"
	"encoding/binary"
	"errors"
	"hash/crc32"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"testing"

	"packwatch/bus"
)

// FuzzDecodeBlock feeds damaged blocks to the decoder, as they are and with
// the checksum made right again (so that damage reaches the parser): it must
// never panic, and whatever it accepts must survive another encode and
// decode unchanged.
func FuzzDecodeBlock(f *testing.F) {
	for seed := range uint64(6) {
		rng := rand.New(rand.NewPCG(seed, 11))
		for _, b := range encodeAll(randomBatch(rng, 1+rng.IntN(60), rng.Int64N(4e18))) {
			f.Add(b)
		}
	}
	f.Add(encodeAll(packTraffic(300, 5))[0])
	f.Add([]byte{})
	f.Add([]byte{1, 0, 0, 0, 0, 0, 0, 0})
	f.Fuzz(func(t *testing.T, b []byte) {
		fuzzBlock(t, b)
		if len(b) >= 5 {
			fixed := append([]byte(nil), b[:len(b)-4]...)
			fuzzBlock(t, binary.LittleEndian.AppendUint32(fixed, crc32.Checksum(fixed, castagnoli)))
		}
	})
}

func fuzzBlock(t *testing.T, b []byte) {
	{
		var d blockDecoder
		msgs, err := d.decode(b, nil)
		if err != nil {
			if !errors.Is(err, ErrCorrupt) {
				t.Fatalf("error %v does not wrap ErrCorrupt", err)
			}
			if len(msgs) != 0 {
				t.Fatalf("%d messages returned with an error", len(msgs))
			}
			return
		}
		var again []bus.Message
		for _, blk := range encodeAll(msgs) {
			if again, err = d.decode(blk, again); err != nil {
				t.Fatalf("re-encoded block: %v", err)
			}
		}
		if !reflect.DeepEqual(again, msgs) {
			t.Fatalf("re-encoding changed the messages")
		}
	}
}

// fuzzRecording is a small closed recording with messages, events, a
// profile and stats, as bytes.
func fuzzRecording(tb testing.TB) []byte {
	path := filepath.Join(tb.TempDir(), "seed.db")
	w, err := Create(path, testMeta, Options{})
	if err != nil {
		tb.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(8, 9))
	msgs := monotonic(rng, 300, 1_773_000_000e9)
	w.Write(msgs)
	w.Profile(msgs[0].T, "pack-a", "[pack]\ncells = 12\n", "00ff")
	w.Event(Event{T: msgs[1].T, Kind: EventWarn, Source: 1, Text: "cell 3 low", JSON: `{"cell":3}`})
	w.Stats(msgs[0].T/1e9, []StatRow{{Bind: "pack.current", Min: -40, Max: -38, Last: -39}})
	if err := w.Close(); err != nil {
		tb.Fatal(err)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		tb.Fatal(err)
	}
	return b
}

// FuzzOpen feeds damaged recording files to Open and every reading method:
// they must fail with an error or read, never panic or hang.
func FuzzOpen(f *testing.F) {
	good := fuzzRecording(f)
	f.Add(good, uint16(0), byte(0))
	f.Add(good, uint16(100), byte(0xff))      // header: page size / counters
	f.Add(good, uint16(4096+8), byte(0x0d))   // first page's b-tree header
	f.Add(good, uint16(len(good)-1), byte(1)) // inside the last page (block data)
	f.Add(good[:len(good)/2], uint16(0), byte(0))
	f.Fuzz(func(t *testing.T, file []byte, at uint16, x byte) {
		if len(file) > 1<<20 {
			return
		}
		file = append([]byte(nil), file...)
		if int(at) < len(file) {
			file[at] ^= x
		}
		path := filepath.Join(t.TempDir(), "f.db")
		if err := os.WriteFile(path, file, 0o644); err != nil {
			t.Fatal(err)
		}
		r, err := Open(path)
		if err != nil {
			return
		}
		defer r.Close()
		r.Meta()
		r.Profiles()
		r.Events()
		r.Sessions()
		r.Span()
		r.Binds()
		r.Stats("pack.current", math.MinInt64, math.MaxInt64)
		r.Scan(context.Background(), math.MinInt64, math.MaxInt64, func([]bus.Message) error { return nil })
	})
}
