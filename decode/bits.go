package decode

import (
	"encoding/binary"
	"math"

	"packwatch/config"
)

// Extract reads a field's raw bits from an 8-byte payload.
func Extract(data [8]byte, l config.Layout) uint64 {
	fd := newFieldDec(l, false, false)
	return fd.extract(binary.LittleEndian.Uint64(data[:]), binary.BigEndian.Uint64(data[:]))
}

// Insert writes raw into the field's bits of an 8-byte payload, leaving the
// other bits as they are. It is the inverse of Extract; encoders use it.
func Insert(data *[8]byte, l config.Layout, raw uint64) {
	fd := newFieldDec(l, false, false)
	raw &= fd.mask
	if l.Big {
		be := binary.BigEndian.Uint64(data[:])
		be = be&^(fd.mask<<fd.shift) | raw<<fd.shift
		binary.BigEndian.PutUint64(data[:], be)
		return
	}
	le := binary.LittleEndian.Uint64(data[:])
	le = le&^(fd.mask<<fd.shift) | raw<<fd.shift
	binary.LittleEndian.PutUint64(data[:], le)
}

// RawFor converts a value in the field's unit to the raw bits that decode to
// it (rounded to the nearest count, clamped to the field's width), for
// encoders. It is the inverse of the decoder's raw × scale + offset.
func RawFor(f *config.CANField, value float64) uint64 {
	x := (value - f.Offset) / f.Scale
	if f.Float {
		return uint64(math.Float32bits(float32(x)))
	}
	n := math.Round(x)
	bits := f.Layout.Bits
	var lo, hi float64
	if f.Signed {
		lo, hi = -math.Ldexp(1, bits-1), math.Ldexp(1, bits-1)-1
	} else {
		lo, hi = 0, math.Ldexp(1, bits)-1
	}
	n = math.Max(lo, math.Min(hi, n))
	mask := uint64(math.MaxUint64)
	if bits < 64 {
		mask = 1<<uint(bits) - 1
	}
	return uint64(int64(n)) & mask
}
