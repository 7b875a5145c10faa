package decode

import (
	"math"
	"strings"
	"testing"

	"go.einride.tech/can"

	"packwatch/bus"
	"packwatch/config"
)

func load(t testing.TB, text string) *Map {
	t.Helper()
	p, err := config.Parse("test.toml", []byte(text))
	if err != nil {
		t.Fatalf("parse: %v", err)
	}
	m, err := Compile(p)
	if err != nil {
		t.Fatalf("compile: %v", err)
	}
	return m
}

func loadExample(t testing.TB) *Map {
	t.Helper()
	p, err := config.Load("../config/examples/buoy-winch.toml")
	if err != nil {
		t.Fatalf("load example: %v", err)
	}
	m, err := Compile(p)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func frame(id uint32, data ...byte) bus.Message {
	f := can.Frame{ID: id, Length: uint8(len(data)), IsExtended: id > 0x7FF}
	copy(f.Data[:], data)
	return bus.Message{T: 1e9, Kind: bus.KindCAN, Frame: f}
}

func value(t *testing.T, m *Map, v *Values, name string) (float64, Flag) {
	t.Helper()
	i, ok := m.SlotIndex(name)
	if !ok {
		t.Fatalf("no slot %s", name)
	}
	return v.V[i], v.Flag[i]
}

const header = `
[pack]
name = "t"
cells = 4
temp_sensors = 2
capacity_ah = 10
[limits]
cell_high_v = 4.2
cell_low_v = 3.0
[[source]]
name = "bus"
kind = "socketcan"
device = "can0"
`

// TestBitLayouts checks the worked bit layouts drawn in the README ("Bit
// fields"), byte for byte. The payload is 00 AB CD 00 00 00 00 00.
//
// Little order, byte = 1, bit = 4, bits = 12: the value's least significant
// bit is bit 4 of byte 1; bits 4..7 of byte 1 (0xA) are the low nibble, byte 2
// (0xCD) the next eight bits: 0xCDA = 3290.
//
// Big order, byte = 1, bit = 3, bits = 12: bit 3 of byte 1 is the most
// significant bit; bits 3..0 of byte 1 (0xB) are the high nibble, byte 2 the
// low byte: 0xBCD = 3021.
func TestBitLayouts(t *testing.T) {
	m := load(t, header+`
[[frame]]
id = 0x100
  [[frame.field]]
  bind = "aux.little"
  byte = 1
  bit = 4
  bits = 12
[[frame]]
id = 0x101
  [[frame.field]]
  bind = "aux.big"
  byte = 1
  bit = 3
  bits = 12
  order = "big"
[[frame]]
id = 0x102
  [[frame.field]]
  bind = "aux.le16"
  byte = 1
  size = 2
  [[frame.field]]
  bind = "aux.be16"
  byte = 3
  size = 2
  order = "big"
`)
	v := NewValues(m)
	for _, id := range []uint32{0x100, 0x101} {
		msg := frame(id, 0x00, 0xAB, 0xCD, 0, 0, 0, 0, 0)
		m.Decode(&msg, v)
	}
	msg := frame(0x102, 0x00, 0x34, 0x12, 0x12, 0x34)
	m.Decode(&msg, v)
	for _, c := range []struct {
		bind string
		want float64
	}{{"aux.little", 0xCDA}, {"aux.big", 0xBCD}, {"aux.le16", 0x1234}, {"aux.be16", 0x1234}} {
		if got, _ := value(t, m, v, c.bind); got != c.want {
			t.Errorf("%s = %#x, want %#x", c.bind, int(got), int(c.want))
		}
	}
	// Insert is the inverse of Extract for both layouts.
	for _, f := range m.Fields() {
		var d [8]byte
		Insert(&d, f.Layout, 0x5A5)
		if got := Extract(d, f.Layout); got != 0x5A5&(1<<f.Layout.Bits-1) {
			t.Errorf("%s: Insert then Extract = %#x", f.Name, got)
		}
	}
}

// TestSigned checks two's complement at 8, 12, 16 and 32 bits: a raw value
// with its top bit set is raw − 2^n (the definition of two's complement; common
// practice, no source).
func TestSigned(t *testing.T) {
	m := load(t, header+`
[[frame]]
id = 0x200
  [[frame.field]]
  bind = "aux.s8"
  byte = 0
  size = 1
  signed = true
  [[frame.field]]
  bind = "aux.s12"
  byte = 1
  bits = 12
  signed = true
  [[frame.field]]
  bind = "aux.s16"
  byte = 4
  size = 2
  signed = true
  order = "big"
[[frame]]
id = 0x201
  [[frame.field]]
  bind = "aux.s32"
  byte = 0
  size = 4
  signed = true
`)
	cases := []struct {
		name string
		data []byte
		id   uint32
		want map[string]float64
	}{
		{"negative", []byte{0x80, 0x00, 0x08, 0, 0x80, 0x00}, 0x200, map[string]float64{"aux.s8": -128, "aux.s12": -2048, "aux.s16": -32768}},
		{"minus one", []byte{0xFF, 0xFF, 0x0F, 0, 0xFF, 0xFF}, 0x200, map[string]float64{"aux.s8": -1, "aux.s12": -1, "aux.s16": -1}},
		{"largest", []byte{0x7F, 0xFF, 0x07, 0, 0x7F, 0xFF}, 0x200, map[string]float64{"aux.s8": 127, "aux.s12": 2047, "aux.s16": 32767}},
		{"s32 min", []byte{0, 0, 0, 0x80}, 0x201, map[string]float64{"aux.s32": -2147483648}},
		{"s32 -1", []byte{0xFF, 0xFF, 0xFF, 0xFF}, 0x201, map[string]float64{"aux.s32": -1}},
		{"s32 max", []byte{0xFF, 0xFF, 0xFF, 0x7F}, 0x201, map[string]float64{"aux.s32": 2147483647}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			v := NewValues(m)
			msg := frame(c.id, c.data...)
			m.Decode(&msg, v)
			for bind, want := range c.want {
				if got, _ := value(t, m, v, bind); got != want {
					t.Errorf("%s = %v, want %v", bind, got, want)
				}
			}
		})
	}
}

// TestFloat checks IEEE 754 single precision (IEEE Std 754-2008, binary32):
// 0x3F800000 = 1.0, 0xC0000000 = −2.0, 0x40490FDB = 3.14159274 (bit patterns
// from memory, each checkable by hand from sign, exponent and fraction).
func TestFloat(t *testing.T) {
	m := load(t, header+`
[[frame]]
id = 0x300
  [[frame.field]]
  bind = "aux.f_le"
  byte = 0
  size = 4
  float = true
  [[frame.field]]
  bind = "aux.f_be"
  byte = 4
  size = 4
  float = true
  order = "big"
`)
	cases := []struct {
		data   []byte
		le, be float64
	}{
		{[]byte{0x00, 0x00, 0x80, 0x3F, 0xC0, 0x00, 0x00, 0x00}, 1.0, -2.0},
		{[]byte{0xDB, 0x0F, 0x49, 0x40, 0x40, 0x49, 0x0F, 0xDB}, 3.1415927410125732, 3.1415927410125732},
	}
	for _, c := range cases {
		v := NewValues(m)
		msg := frame(0x300, c.data...)
		m.Decode(&msg, v)
		if got, _ := value(t, m, v, "aux.f_le"); got != c.le {
			t.Errorf("f_le = %v, want %v", got, c.le)
		}
		if got, _ := value(t, m, v, "aux.f_be"); got != c.be {
			t.Errorf("f_be = %v, want %v", got, c.be)
		}
	}
	// NaN (0x7FC00000) is a counted decode error, never a value.
	v := NewValues(m)
	msg := frame(0x300, 0x00, 0x00, 0xC0, 0x7F, 0, 0, 0, 0)
	m.Decode(&msg, v)
	if v.Src[0].DecodeErrors != 1 {
		t.Errorf("NaN: decode errors = %d, want 1", v.Src[0].DecodeErrors)
	}
	if _, fl := value(t, m, v, "aux.f_le"); fl != FlagNone {
		t.Errorf("NaN stored with flag %d", fl)
	}
}

// TestExample decodes hand-built frames and lines of the example profile to
// the values its comments describe.
func TestExample(t *testing.T) {
	m := loadExample(t)
	v := NewValues(m)
	msgs := []bus.Message{
		// mux 1 → cells 4, 5, 6; little-endian millivolts 3916, 3920, 3925
		frame(0x4C0, 0x01, 0x4C, 0x0F, 0x50, 0x0F, 0x55, 0x0F, 0x00),
		// current −20.0 A (0xFF38 big-endian, ×0.1), 46.88 V (0x1250 ×0.01), contactor closed, state 2
		frame(0x4D0, 0xFF, 0x38, 0x12, 0x50, 0x00, 0x01, 0x02, 0x00),
		// temps: 0x41 − 40 = 25 °C; 0xFF = no sensor; 200 − 40 = 160 °C is outside [-40, 120]
		frame(0x4E0, 0x41, 0xFF, 0xC8),
	}
	for i := range msgs {
		m.Decode(&msgs[i], v)
	}
	line := bus.Message{T: 2e9, Src: 1, Kind: bus.KindLine, Text: "cell 3: 3912 mV"}
	m.Decode(&line, v)

	want := []struct {
		bind string
		v    float64
		flag Flag
	}{
		{"cell[4].voltage", 3.916, FlagOK},
		{"cell[5].voltage", 3.920, FlagOK},
		{"cell[6].voltage", 3.925, FlagOK},
		{"pack.current", -20.0, FlagOK},
		{"pack.voltage", 46.88, FlagOK},
		{"contactor.main", 1, FlagOK},
		{"bms.state", 2, FlagOK},
		{"temp[1]", 25, FlagOK},
		{"temp[2]", 215, FlagInvalid},
		{"temp[3]", 160, FlagFault},
		{"cell[3].voltage", 3.912, FlagOK},
	}
	for _, w := range want {
		got, fl := value(t, m, v, w.bind)
		if math.Abs(got-w.v) > 1e-9 || fl != w.flag {
			t.Errorf("%s = %v (flag %d), want %v (flag %d)", w.bind, got, fl, w.v, w.flag)
		}
	}
	i, _ := m.SlotIndex("bms.state")
	if name := m.Slots()[i].Enum[2]; name != "discharging" {
		t.Errorf("bms.state enum 2 = %q", name)
	}
	if got, _ := value(t, m, v, "cell[1].voltage"); got != 0 {
		t.Errorf("cell 1 written by a mux 1 frame")
	}
	if len(v.Updated) != 11 {
		t.Errorf("updated %d slots, want 11", len(v.Updated))
	}
}

// TestShortAndUnknown: a frame too short for a field is a counted decode error
// for that field; unknown IDs and unmatched lines are counted per source.
func TestShortAndUnknown(t *testing.T) {
	m := loadExample(t)
	v := NewValues(m)
	short := frame(0x4D0, 0xFF, 0x38, 0x12, 0x50) // 4 bytes: contactor and state missing
	unknown := frame(0x123, 1, 2, 3)
	empty := frame(0x4C0) // no mux byte
	for _, msg := range []bus.Message{short, unknown, empty} {
		m.Decode(&msg, v)
	}
	for _, l := range []string{"hello", "cell 13: 3900 mV", "cell 2: 39x0 mV"} {
		msg := bus.Message{Src: 1, Kind: bus.KindLine, Text: l}
		m.Decode(&msg, v)
	}
	can, con := v.Src[0], v.Src[1]
	if can.DecodeErrors != 3 || can.Unknown != 1 || can.Messages != 3 {
		t.Errorf("can: errors %d unknown %d messages %d, want 3 1 3", can.DecodeErrors, can.Unknown, can.Messages)
	}
	if got, _ := value(t, m, v, "pack.voltage"); got != 46.88 {
		t.Errorf("short frame: voltage %v not decoded", got)
	}
	// "cell 13" is above the pack's 12 cells: a decode error; "hello" matches
	// nothing; "39x0" does not match \d+.
	if con.Unknown != 2 || con.DecodeErrors != 1 {
		t.Errorf("console: unknown %d errors %d, want 2 1", con.Unknown, con.DecodeErrors)
	}
	if st := can.IDs[0x123]; st == nil || st.Known || st.Count != 1 {
		t.Errorf("ID stats for 0x123: %+v", st)
	}
}

func TestIDRangeAndTemplates(t *testing.T) {
	m := load(t, header+`
[[frame]]
id = "0x500..0x501"
period_ms = 100
  [[frame.field]]
  bind = "cell[{2*id+1}..{2*id+2}].voltage"
  byte = 0
  size = 2
  scale = 0.001
`)
	v := NewValues(m)
	for _, msg := range []bus.Message{frame(0x500, 0xE8, 0x03, 0xD0, 0x07), frame(0x501, 0xB8, 0x0B, 0xA0, 0x0F)} {
		m.Decode(&msg, v)
	}
	for i, want := range []float64{1, 2, 3, 4} {
		name := "cell[" + string(rune('1'+i)) + "].voltage"
		if got, _ := value(t, m, v, name); math.Abs(got-want) > 1e-12 {
			t.Errorf("%s = %v, want %v", name, got, want)
		}
	}
	i, _ := m.SlotIndex("cell[1].voltage")
	// 2 IDs at 100 ms each: every binding is refreshed every 200 ms.
	if got := m.Slots()[i].IntervalNs; got != 200e6 {
		t.Errorf("interval %d, want 200 ms", got)
	}
}

func TestRawForRoundTrip(t *testing.T) {
	m := loadExample(t)
	for _, f := range m.Fields() {
		for _, val := range []float64{3.7, -20.5, 25, 1, 0} {
			var d [8]byte
			Insert(&d, f.Layout, RawFor(&f, val))
			raw := Extract(d, f.Layout)
			got := float64(raw)
			if f.Signed && raw&(1<<(f.Layout.Bits-1)) != 0 {
				got -= math.Ldexp(1, f.Layout.Bits)
			}
			got = got*f.Scale + f.Offset
			lo := f.Offset
			if f.Signed {
				lo -= math.Ldexp(1, f.Layout.Bits-1) * math.Abs(f.Scale)
			}
			hi := lo + (math.Ldexp(1, f.Layout.Bits)-1)*math.Abs(f.Scale)
			if val < lo || val > hi {
				continue
			}
			if math.Abs(got-val) > math.Abs(f.Scale)/2+1e-9 {
				t.Errorf("%s: %v → %v", f.Name, val, got)
			}
		}
	}
}

func TestLinesIndexBase(t *testing.T) {
	m := load(t, header+`
[[source]]
name = "con"
kind = "serial-text"
device = "/dev/null"
[[line]]
pattern = '^T(?P<i>\d)=(?P<c>-?[\d.]+)C$'
  [[line.field]]
  group = "c"
  bind = "temp[{i}]"
  index_base = 0
`)
	v := NewValues(m)
	for _, l := range []string{"T0=21.5C", "T1=-3C", "T2=5C"} {
		msg := bus.Message{Src: 1, Kind: bus.KindLine, Text: l}
		m.Decode(&msg, v)
	}
	if got, _ := value(t, m, v, "temp[1]"); got != 21.5 {
		t.Errorf("temp[1] = %v", got)
	}
	if got, _ := value(t, m, v, "temp[2]"); got != -3 {
		t.Errorf("temp[2] = %v", got)
	}
	if v.Src[1].DecodeErrors != 1 {
		t.Errorf("T2 (third sensor of two) should be a decode error, got %d", v.Src[1].DecodeErrors)
	}
	if !strings.HasPrefix(m.Lines()[0].Re.String(), "^T") {
		t.Error("Lines() lost the pattern")
	}
}
