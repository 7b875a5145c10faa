package decode

import (
	"testing"

	"go.einride.tech/can"

	"packwatch/bus"
)

// FuzzDecodeFrame feeds arbitrary frames and lines to the example profile's
// decoder: it must never panic, and every value it stores must be finite.
func FuzzDecodeFrame(f *testing.F) {
	f.Add(uint32(0x4C0), []byte{0x01, 0x4C, 0x0F, 0x50, 0x0F, 0x55, 0x0F, 0x00}, "cell 3: 3912 mV")
	f.Add(uint32(0x4D0), []byte{0xFF, 0x38}, "cell 99999999999999999999: 1 mV")
	f.Add(uint32(0x4E0), []byte{}, "")
	f.Add(uint32(0x1FFFFFFF), []byte{1, 2, 3, 4, 5, 6, 7, 8, 9}, "cell 0: -1 mV")
	m := loadExample(f)
	f.Fuzz(func(t *testing.T, id uint32, data []byte, line string) {
		v := NewValues(m)
		fr := can.Frame{ID: id & 0x1FFFFFFF, IsExtended: id&0x80000000 != 0 || id&0x1FFFFFFF > 0x7FF}
		n := copy(fr.Data[:], data)
		fr.Length = uint8(n)
		msgs := []bus.Message{{Kind: bus.KindCAN, Frame: fr}, {Src: 1, Kind: bus.KindLine, Text: line}, {Src: 7, Kind: bus.KindCAN, Frame: fr}}
		for i := range msgs {
			m.Decode(&msgs[i], v)
		}
		for _, s := range v.Updated {
			if x := v.V[s]; x != x || x > 1e308 || x < -1e308 {
				t.Fatalf("slot %d holds %v", s, x)
			}
		}
	})
}
