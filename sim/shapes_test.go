package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
)

// fieldSpan is the range of values a CAN field can carry.
func fieldSpan(f *config.CANField) (lo, hi float64) {
	if f.Float {
		return -1e4, 1e4
	}
	bits := f.Layout.Bits
	var rlo, rhi float64
	if f.Signed {
		rlo, rhi = -math.Ldexp(1, bits-1), math.Ldexp(1, bits-1)-1
	} else {
		rlo, rhi = 0, math.Ldexp(1, bits)-1
	}
	a, b := rlo*f.Scale+f.Offset, rhi*f.Scale+f.Offset
	return math.Min(a, b), math.Max(a, b)
}

// Encode then decode gives every value back within one count of its scale,
// for every field shape of the profile language: byte-aligned little and
// big, bit fields in both orders, signed, float, offset, enum, invalid, mux,
// ID ranges and line groups (testdata/shapes.toml), and for the example
// profile. Random values, seeded; 300 rounds each.
func TestEncodeDecodeRoundTrip(t *testing.T) {
	for _, path := range []string{"testdata/shapes.toml", buoyProfile} {
		t.Run(path, func(t *testing.T) {
			dm := loadMap(t, path)
			enc, err := NewEncoder(dm)
			if err != nil {
				t.Fatal(err)
			}
			slots := dm.Slots()
			// per slot: the values every field feeding it can carry, and the
			// tolerance of one count of the coarsest field
			lo := make([]float64, len(slots))
			hi := make([]float64, len(slots))
			tol := make([]float64, len(slots))
			canInvalid := make([]bool, len(slots))
			enums := make([][]int64, len(slots))
			for i := range slots {
				lo[i], hi[i] = -1000, 1000
			}
			for _, f := range dm.Fields() {
				i, _ := dm.SlotIndex(f.Name)
				a, b := fieldSpan(&f)
				lo[i], hi[i] = math.Max(lo[i], a), math.Min(hi[i], b)
				if f.Range != nil {
					lo[i], hi[i] = math.Max(lo[i], f.Range[0]), math.Min(hi[i], f.Range[1])
				}
				c := math.Abs(f.Scale)
				if f.Float {
					c = math.Abs(f.Scale) * 1e4 * math.Ldexp(1, -23) // float32 rounding at |x| ≤ 1e4
				}
				tol[i] = math.Max(tol[i], c)
				canInvalid[i] = canInvalid[i] || len(f.Invalid) > 0
				for code := range f.Enum {
					enums[i] = append(enums[i], code)
				}
			}
			for _, ls := range dm.Lines() {
				gen, err := newLineGen(ls.Re)
				if err != nil {
					t.Fatal(err)
				}
				for _, lf := range ls.Fields {
					neg := gen.Fits(lf.Group, "-1") || gen.Fits(lf.Group, "-1.0") || gen.Fits(lf.Group, "-1.000")
					for _, name := range lf.Names {
						i, _ := dm.SlotIndex(name)
						// the patterns' groups print 3, 1 or 0 decimals of the raw number
						tol[i] = math.Max(tol[i], math.Abs(lf.Scale))
						if slots[i].Bind.Bool() {
							lo[i], hi[i] = 0, 1
						}
						if !neg {
							lo[i] = math.Max(lo[i], 0)
						}
					}
				}
			}
			rng := rand.New(rand.NewPCG(42, 7))
			shapesSeen := map[string]bool{}
			for round := 0; round < 300; round++ {
				r := make([]Reading, len(slots))
				for i, s := range slots {
					switch {
					case len(enums[i]) > 0:
						r[i] = Reading{Value: float64(enums[i][rng.IntN(len(enums[i]))]), Raw: true}
					case s.Bind.Bool():
						r[i] = Reading{Value: float64(rng.IntN(2))}
					case s.Bind.Kind == config.BindCellVoltage:
						r[i] = Reading{Value: 2.5 + 2*rng.Float64()}
					default:
						r[i] = Reading{Value: lo[i] + (hi[i]-lo[i])*rng.Float64()}
					}
					if canInvalid[i] && rng.IntN(5) == 0 {
						r[i].Invalid = true
					}
				}
				msgs := enc.Frames(r)
				lines, err := enc.Lines(r)
				if err != nil {
					t.Fatal(err)
				}
				msgs = append(msgs, lines...)
				v := decode.NewValues(dm)
				for k := range msgs {
					msgs[k].T = int64(k + 1)
					dm.Decode(&msgs[k], v)
				}
				for src := range v.Src {
					if c := v.Src[src]; c.Unknown != 0 || c.DecodeErrors != 0 {
						t.Fatalf("round %d source %d: %d unknown, %d decode errors", round, src, c.Unknown, c.DecodeErrors)
					}
				}
				for i, s := range slots {
					if v.T[i] == 0 {
						t.Fatalf("%s never decoded", s.Name)
					}
					if r[i].Invalid {
						if v.Flag[i] != decode.FlagInvalid {
							t.Fatalf("round %d %s: sent invalid, decoded flag %v value %g", round, s.Name, v.Flag[i], v.V[i])
						}
						shapesSeen["invalid"] = true
						continue
					}
					if v.Flag[i] != decode.FlagOK {
						t.Fatalf("round %d %s: sent %g, decoded flag %v", round, s.Name, r[i].Value, v.Flag[i])
					}
					want := r[i].Value
					if r[i].Raw {
						want = float64(int64(want)) // enums here have scale 1, offset 0
						shapesSeen["enum"] = true
					}
					if d := math.Abs(v.V[i] - want); d > tol[i]*(1+1e-9) {
						t.Fatalf("round %d %s: sent %.9g, decoded %.9g (off by %.3g, one count is %.3g)", round, s.Name, want, v.V[i], d, tol[i])
					}
				}
			}
			if path != buoyProfile && !shapesSeen["invalid"] {
				t.Error("no invalid reading was tried")
			}
		})
	}
}

// Hand-worked frames, computed bit by bit from PROFILE-SPEC.md's layout
// rules (little order: the value's LSB at (byte, bit), continuing upward;
// big order: its MSB at (byte, bit), continuing downward).
func TestEncoderExactBytes(t *testing.T) {
	cases := []struct {
		profile string
		id      uint32
		ext     bool
		mux     int // -1: no mux
		vals    map[string]Reading
		want    [8]byte
	}{
		{buoyProfile, 0x4D0, false, -1, map[string]Reading{
			// −253.0 A /0.1 = −2530 = 0xF61E big; 44.40 V /0.01 = 4440 = 0x1158
			"pack.current": {Value: -253}, "pack.voltage": {Value: 44.40},
			"contactor.main": {Value: 1}, "bms.state": {Value: 2, Raw: true},
		}, [8]byte{0xF6, 0x1E, 0x11, 0x58, 0x00, 0x01, 0x02, 0x00}},
		{buoyProfile, 0x4C0, false, 1, map[string]Reading{
			// mux 1: cells 4–6, mV little-endian: 3700 = 0x0E74
			"cell[4].voltage": {Value: 3.700}, "cell[5].voltage": {Value: 3.701}, "cell[6].voltage": {Value: 3.702},
		}, [8]byte{0x01, 0x74, 0x0E, 0x75, 0x0E, 0x76, 0x0E, 0x00}},
		{buoyProfile, 0x4E0, false, -1, map[string]Reading{
			// offset −40: 12 °C → 52 = 0x34; 0 °C → 40; sensor 3 invalid → 0xFF
			"temp[1]": {Value: 12}, "temp[2]": {Value: 0}, "temp[3]": {Invalid: true},
		}, [8]byte{0x34, 0x28, 0xFF, 0, 0, 0, 0, 0}},
		{"testdata/shapes.toml", 0x101, false, -1, map[string]Reading{
			// little12 at byte 0 bit 4, signed, ×0.25 +10: 9.0 → −4 = 0xFFC:
			// byte 0 high nibble C, byte 1 FF.
			"aux.little12": {Value: 9},
			// big10 MSB at byte 2 bit 5, ×0.1 −20: 0 → 200 = 00 1100 1000b:
			// byte 2 bits 5..0 = 001100 (0x0C), byte 3 bits 7..4 = 1000 (0x80).
			"aux.big10": {Value: 0},
			// big_signed MSB at byte 4 bit 7, 13 bits, ×0.01: −0.01 → −1 =
			// 1 1111 1111 1111b: byte 4 = FF, byte 5 bits 7..3 = 11111 (0xF8).
			"aux.big_signed": {Value: -0.01},
			"fault.overtemp": {Value: 1}, // byte 7 bit 7
		}, [8]byte{0xC0, 0xFF, 0x0C, 0x80, 0xFF, 0xF8, 0x00, 0x80}},
	}
	for _, c := range cases {
		t.Run(fmt.Sprintf("%s/%X/%d", c.profile, c.id, c.mux), func(t *testing.T) {
			dm := loadMap(t, c.profile)
			enc, err := NewEncoder(dm)
			if err != nil {
				t.Fatal(err)
			}
			r := make([]Reading, len(dm.Slots()))
			for name, rd := range c.vals {
				i, ok := dm.SlotIndex(name)
				if !ok {
					t.Fatalf("no slot %s", name)
				}
				r[i] = rd
			}
			var got *bus.Message
			frames := enc.Frames(r)
			for k := range frames {
				f := &frames[k].Frame
				if f.ID == c.id && f.IsExtended == c.ext && (c.mux < 0 || int(f.Data[0]) == c.mux) {
					got = &frames[k]
				}
			}
			if got == nil {
				t.Fatalf("no frame %X", c.id)
			}
			if got.Frame.Data != c.want || got.Frame.Length != 8 {
				t.Errorf("data % X (len %d), want % X", got.Frame.Data, got.Frame.Length, c.want)
			}
		})
	}
}
