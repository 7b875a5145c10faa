package record

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"reflect"
	"strings"
	"testing"

	"go.einride.tech/can"

	"packwatch/bus"
)

// randomBatch makes n messages of every kind: standard, extended, remote and
// error frames of all lengths, console lines and gaps, times that mostly
// advance but sometimes jump back or far ahead, and a few sources.
func randomBatch(rng *rand.Rand, n int, t0 int64) []bus.Message {
	out := make([]bus.Message, n)
	t := t0
	for i := range out {
		switch rng.IntN(20) {
		case 0:
			t -= rng.Int64N(5e9) // backwards (another source's clock)
		case 1:
			t += rng.Int64N(1e12) // a long pause
		default:
			t += rng.Int64N(400e3)
		}
		m := bus.Message{T: t, Src: uint16(rng.IntN(3))}
		switch k := rng.IntN(10); {
		case k < 6:
			m.Kind = bus.KindCAN
			m.Frame = can.Frame{ID: uint32(0x100 + rng.IntN(6)), Length: uint8(rng.IntN(9))}
			if rng.IntN(4) == 0 {
				m.Frame.ID = rng.Uint32() & 0x1FFFFFFF
				m.Frame.IsExtended = true
			}
			if rng.IntN(10) == 0 {
				m.Frame.IsRemote = true
			}
			binary.LittleEndian.PutUint64(m.Frame.Data[:], rng.Uint64()&lenMask[payloadLen(m.Frame.Length)])
		case k < 7:
			m.Kind = bus.KindError
			m.Frame = can.Frame{ID: rng.Uint32() & 0x1FFFFFFF, Length: 8}
			binary.LittleEndian.PutUint64(m.Frame.Data[:], rng.Uint64())
		case k < 9:
			m.Kind = bus.KindLine
			b := make([]byte, rng.IntN(200))
			for j := range b {
				b[j] = byte(rng.IntN(256))
			}
			m.Text = string(b)
		default:
			m.Kind = bus.KindGap
			m.Text = "reconnect"
		}
		out[i] = m
	}
	return out
}

// expected is what a message reads back as: time to the µs, no payload
// beyond the length, Text only for text kinds and Frame only for others.
func expected(m bus.Message) bus.Message {
	m.T = floorMicros(m.T) * 1000
	if isText(m.Kind) {
		m.Frame = can.Frame{}
	} else {
		m.Text = ""
		d := binary.LittleEndian.Uint64(m.Frame.Data[:]) & lenMask[payloadLen(m.Frame.Length)]
		binary.LittleEndian.PutUint64(m.Frame.Data[:], d)
	}
	return m
}

func encodeAll(msgs []bus.Message) [][]byte {
	var e blockEncoder
	e.reset()
	var blocks [][]byte
	for i := range msgs {
		e.add(&msgs[i])
		if e.full() {
			blocks = append(blocks, e.seal(nil))
			e.reset()
		}
	}
	if e.n > 0 {
		blocks = append(blocks, e.seal(nil))
	}
	return blocks
}

// TestCodecRoundTrip is a property test: random batches of every kind read
// back exactly (to the µs).
func TestCodecRoundTrip(t *testing.T) {
	for seed := range uint64(40) {
		rng := rand.New(rand.NewPCG(seed, 7))
		msgs := randomBatch(rng, 1+rng.IntN(9000), rng.Int64N(4e18)-2e18)
		var got []bus.Message
		var d blockDecoder
		for bi, b := range encodeAll(msgs) {
			var err error
			got, err = d.decode(b, got)
			if err != nil {
				t.Fatalf("seed %d block %d: %v", seed, bi, err)
			}
		}
		if len(got) != len(msgs) {
			t.Fatalf("seed %d: %d messages back, want %d", seed, len(got), len(msgs))
		}
		for i := range msgs {
			if want := expected(msgs[i]); !reflect.DeepEqual(got[i], want) {
				t.Fatalf("seed %d message %d:\n got %+v\nwant %+v", seed, i, got[i], want)
			}
		}
	}
}

func TestCodecTable(t *testing.T) {
	tests := []struct {
		name string
		in   bus.Message
	}{
		{"standard 3 bytes", bus.Message{T: 1_700_000_000_123_456_789, Kind: bus.KindCAN,
			Frame: can.Frame{ID: 0x456, Length: 3, Data: can.Data{0x11, 0x22, 0x33}}}},
		{"extended", bus.Message{T: 5, Src: 2, Kind: bus.KindCAN,
			Frame: can.Frame{ID: 0x12ABCDEF, Length: 2, IsExtended: true, Data: can.Data{0xAA, 0x55}}}},
		{"remote length 0", bus.Message{T: -1500, Kind: bus.KindCAN, Frame: can.Frame{ID: 0x123, IsRemote: true}}},
		{"remote with dlc", bus.Message{T: 0, Kind: bus.KindCAN, Frame: can.Frame{ID: 0x123, Length: 4, IsRemote: true}}},
		{"length 15", bus.Message{T: 0, Kind: bus.KindCAN, Frame: can.Frame{ID: 0x7FF, Length: 15, Data: can.Data{1, 2, 3, 4, 5, 6, 7, 8}}}},
		{"empty line", bus.Message{T: 9e18, Kind: bus.KindLine}},
		{"earliest time", bus.Message{T: math.MinInt64, Kind: bus.KindLine, Text: "a"}},
		{"latest time", bus.Message{T: math.MaxInt64, Kind: bus.KindLine, Text: "z"}},
		{"line", bus.Message{T: 9e18, Src: 65535, Kind: bus.KindLine, Text: "V1=3.712 V2=3.709"}},
		{"gap", bus.Message{T: 1, Kind: bus.KindGap, Text: "suspend 12 s"}},
		{"error frame", bus.Message{T: 1, Kind: bus.KindError, Frame: can.Frame{ID: 0x20000004, Length: 8, Data: can.Data{0, 8}}}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			blocks := encodeAll([]bus.Message{tt.in, tt.in})
			if len(blocks) != 1 {
				t.Fatalf("%d blocks", len(blocks))
			}
			var d blockDecoder
			got, err := d.decode(blocks[0], nil)
			if err != nil {
				t.Fatal(err)
			}
			want := expected(tt.in)
			if len(got) != 2 || !reflect.DeepEqual(got[0], want) || !reflect.DeepEqual(got[1], want) {
				t.Fatalf("got %+v, want twice %+v", got, want)
			}
		})
	}
}

// TestCodecLayout pins the byte layout documented in codec.go and SCHEMA.md.
func TestCodecExtremeTimes(t *testing.T) {
	msgs := []bus.Message{{T: math.MaxInt64, Kind: bus.KindGap}, {T: math.MinInt64, Kind: bus.KindGap}, {T: math.MaxInt64, Kind: bus.KindGap}}
	var d blockDecoder
	got, err := d.decode(encodeAll(msgs)[0], nil)
	if err != nil {
		t.Fatal(err)
	}
	for i := range msgs {
		if want := expected(msgs[i]); got[i] != want {
			t.Errorf("%d: %+v, want %+v", i, got[i], want)
		}
	}
}

func TestCodecLayout(t *testing.T) {
	msgs := []bus.Message{
		{T: 1_000_000, Kind: bus.KindCAN, Frame: can.Frame{ID: 0x123, Length: 2, Data: can.Data{0x10, 0x20}}},
		{T: 1_100_999, Kind: bus.KindCAN, Frame: can.Frame{ID: 0x123, Length: 2, Data: can.Data{0x11, 0x20}}},
	}
	b := encodeAll(msgs)[0]
	key := uint64(bus.KindCAN)<<42 | 2<<32 | 0x123
	want := []byte{
		1,          // version
		2,          // count
		0xd0, 0x0f, // base 1000 µs, zigzag varint 2000
		1, // one key
	}
	want = appendUvarint(want, key)
	want = append(want,
		0, 0, 0x03, 0x10, 0x20, // slot 0, dt 0, mask 0b11, bytes 10 20
		0, 100, 0x01, 0x01, // slot 0, dt 100 µs, mask 0b01, 0x10^0x11
	)
	if len(b) != len(want)+4 || string(b[:len(want)]) != string(want) {
		t.Fatalf("block % x\nwant    % x + crc", b, want)
	}
	// SCHEMA.md shows the same example.
	doc, err := os.ReadFile("SCHEMA.md")
	if err != nil {
		t.Fatal(err)
	}
	if hex := fmt.Sprintf("`% x`", want); !strings.Contains(string(doc), hex) {
		t.Errorf("SCHEMA.md does not show the example block %s", hex)
	}
}

func TestCodecDamage(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	b := encodeAll(randomBatch(rng, 500, 0))[0]
	var d blockDecoder
	for i := range b {
		c := append([]byte(nil), b...)
		c[i] ^= 0x40
		if _, err := d.decode(c, nil); !errors.Is(err, ErrCorrupt) {
			t.Fatalf("flip at %d: err %v, want ErrCorrupt", i, err)
		}
	}
	for n := range len(b) {
		if _, err := d.decode(b[:n], nil); !errors.Is(err, ErrCorrupt) {
			t.Fatalf("truncated to %d: err %v, want ErrCorrupt", n, err)
		}
	}
}
