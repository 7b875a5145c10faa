package decode

import (
	"encoding/binary"
	"fmt"
	"math"
	"strconv"

	"packwatch/bus"
	"packwatch/config"
)

// Map is a compiled profile: lookup by source and CAN ID to field decoders
// with precomputed shifts, and line patterns with their fields, every range
// and template expanded. A Map is immutable and safe for concurrent use; the
// readings go into a Values owned by the caller.
type Map struct {
	prof  *config.Profile
	slots []Slot
	index map[string]int
	nsrc  int
	// per source: standard IDs in a dense table, extended IDs in a map
	std   [][]*frameDec
	ext   []map[uint32]*frameDec
	lines []lineDec
	// byLineSrc lists the line decoders per source.
	byLineSrc [][]int
	fields    []config.CANField
}

// fieldDec decodes one expanded field. All shifts and masks are precomputed.
type fieldDec struct {
	slot    int32
	shift   uint8
	big     bool
	signed  bool
	float   bool
	needLen uint8
	bits    uint8
	mask    uint64
	scale   float64
	offset  float64
	invalid []int64
	ranged  bool
	lo, hi  float64
}

// frameDec decodes one CAN ID on one source.
type frameDec struct {
	fields []fieldDec // when the frame has no mux
	hasMux bool
	mux    fieldDec // the selector (slot unused)
	// byMux holds the fields per mux value: dense for small values.
	byMux    [][]fieldDec
	byMuxBig map[int64][]fieldDec
}

type lineDec struct {
	spec   config.LineSpec
	fields []lineFieldDec
}

type lineFieldDec struct {
	f *config.LineField
	// slots by resolved index for templated binds; slot for static binds at [0].
	static int32
	byName map[string]int32
}

// Compile turns a loaded profile into a Map.
func Compile(p *config.Profile) (*Map, error) {
	exp := p.Expanded()
	if exp == nil {
		return nil, fmt.Errorf("compile %s: profile was not loaded through config.Load", p.File)
	}
	m := &Map{prof: p, index: map[string]int{}, nsrc: len(p.Sources)}
	m.std = make([][]*frameDec, m.nsrc)
	m.ext = make([]map[uint32]*frameDec, m.nsrc)
	m.byLineSrc = make([][]int, m.nsrc)
	m.fields = exp.CAN

	slotOf := func(name string, b config.Binding, unit string, enum map[int64]string, period int64, src int) int32 {
		if i, ok := m.index[name]; ok {
			s := &m.slots[i]
			if period > 0 && (s.IntervalNs == 0 || period < s.IntervalNs) {
				s.IntervalNs = period
			}
			if s.Enum == nil {
				s.Enum = enum
			}
			return int32(i)
		}
		m.index[name] = len(m.slots)
		m.slots = append(m.slots, Slot{Bind: b, Name: name, Unit: unit, Enum: enum, IntervalNs: period, Src: src})
		return int32(len(m.slots) - 1)
	}

	for i := range exp.CAN {
		f := &exp.CAN[i]
		slot := slotOf(f.Name, f.Bind, f.Unit, f.Enum, f.PeriodNs, f.Src)
		fd := newFieldDec(f.Layout, f.Signed, f.Float)
		fd.slot = slot
		fd.scale, fd.offset, fd.invalid = f.Scale, f.Offset, f.Invalid
		if f.Range != nil {
			fd.ranged, fd.lo, fd.hi = true, f.Range[0], f.Range[1]
		}
		frame := m.frame(f.Src, f.ID, f.Extended)
		if f.HasMux {
			frame.hasMux = true
			frame.mux = newFieldDec(f.MuxLayout, false, false)
			if f.Mux >= 0 && f.Mux < 256 {
				for int(f.Mux) >= len(frame.byMux) {
					frame.byMux = append(frame.byMux, nil)
				}
				frame.byMux[f.Mux] = append(frame.byMux[f.Mux], fd)
			} else {
				if frame.byMuxBig == nil {
					frame.byMuxBig = map[int64][]fieldDec{}
				}
				frame.byMuxBig[f.Mux] = append(frame.byMuxBig[f.Mux], fd)
			}
		} else {
			frame.fields = append(frame.fields, fd)
		}
	}
	for li := range exp.Lines {
		spec := exp.Lines[li]
		ld := lineDec{spec: spec}
		for fi := range spec.Fields {
			f := &ld.spec.Fields[fi]
			lfd := lineFieldDec{f: f, static: -1, byName: map[string]int32{}}
			for _, name := range f.Names {
				b, _ := config.ParseBinding(name)
				s := slotOf(name, b, f.Unit, f.Enum, f.PeriodNs, spec.Src)
				lfd.byName[name] = s
				if f.IndexGroup < 0 {
					lfd.static = s
				}
			}
			ld.fields = append(ld.fields, lfd)
		}
		m.byLineSrc[spec.Src] = append(m.byLineSrc[spec.Src], len(m.lines))
		m.lines = append(m.lines, ld)
	}
	return m, nil
}

func (m *Map) frame(src int, id uint32, ext bool) *frameDec {
	if !ext {
		if m.std[src] == nil {
			m.std[src] = make([]*frameDec, 0x800)
		}
		if m.std[src][id] == nil {
			m.std[src][id] = &frameDec{}
		}
		return m.std[src][id]
	}
	if m.ext[src] == nil {
		m.ext[src] = map[uint32]*frameDec{}
	}
	if m.ext[src][id] == nil {
		m.ext[src][id] = &frameDec{}
	}
	return m.ext[src][id]
}

func newFieldDec(l config.Layout, signed, float bool) fieldDec {
	mask := uint64(math.MaxUint64)
	if l.Bits < 64 {
		mask = 1<<uint(l.Bits) - 1
	}
	return fieldDec{shift: uint8(l.Shift()), big: l.Big, signed: signed, float: float,
		needLen: uint8(l.NeedLen()), bits: uint8(l.Bits), mask: mask}
}

// Slots lists every expanded binding, indexed like Values.
func (m *Map) Slots() []Slot { return m.slots }

// SlotIndex finds a slot by canonical binding name.
func (m *Map) SlotIndex(name string) (int, bool) {
	i, ok := m.index[name]
	return i, ok
}

// Profile is the profile the map was compiled from.
func (m *Map) Profile() *config.Profile { return m.prof }

// Fields lists every expanded CAN field, for encoders and the bus view.
func (m *Map) Fields() []config.CANField { return m.fields }

// Lines lists every compiled line pattern.
func (m *Map) Lines() []config.LineSpec {
	out := make([]config.LineSpec, len(m.lines))
	for i := range m.lines {
		out[i] = m.lines[i].spec
	}
	return out
}

// Known reports whether the profile describes a CAN ID on a source.
func (m *Map) Known(src int, id uint32, ext bool) bool {
	if src < 0 || src >= m.nsrc {
		return false
	}
	if !ext {
		return m.std[src] != nil && id < 0x800 && m.std[src][id] != nil
	}
	return m.ext[src][id] != nil
}

// Decode applies one message to v: it updates the slots the message carries,
// appends their indexes to v.Updated and counts the message on its source.
// Messages from a source the map does not know are ignored.
func (m *Map) Decode(msg *bus.Message, v *Values) {
	src := int(msg.Src)
	if src >= m.nsrc {
		return
	}
	sc := &v.Src[src]
	switch msg.Kind {
	case bus.KindCAN:
		sc.Messages++
		sc.LastT = msg.T
		m.decodeFrame(msg, src, sc, v)
	case bus.KindLine:
		sc.Messages++
		sc.LastT = msg.T
		sc.LastLine = msg.Text
		m.decodeLine(msg, src, sc, v)
	case bus.KindGap:
		sc.Gaps++
	case bus.KindError:
		sc.ErrorFrames++
		sc.LastT = msg.T
	}
}

func (m *Map) decodeFrame(msg *bus.Message, src int, sc *SourceCounters, v *Values) {
	f := &msg.Frame
	id := f.ID
	var fr *frameDec
	if f.IsExtended {
		fr = m.ext[src][id]
	} else if tab := m.std[src]; tab != nil && id < 0x800 {
		fr = tab[id]
	}
	key := id
	if f.IsExtended {
		key |= 1 << 31
	}
	st := sc.IDs[key]
	if st == nil {
		st = &IDStat{FirstT: msg.T, Known: fr != nil}
		sc.IDs[key] = st
	}
	st.Count++
	st.LastT = msg.T
	st.Len = f.Length
	st.Data = f.Data
	if fr == nil {
		sc.Unknown++
		return
	}
	if f.IsRemote {
		return
	}
	le := binary.LittleEndian.Uint64(f.Data[:])
	be := binary.BigEndian.Uint64(f.Data[:])
	fields := fr.fields
	if fr.hasMux {
		if fr.mux.needLen > f.Length {
			sc.DecodeErrors++
			return
		}
		mv := int64(fr.mux.extract(le, be))
		if mv >= 0 && mv < int64(len(fr.byMux)) {
			fields = fr.byMux[mv]
		} else {
			fields = fr.byMuxBig[mv]
		}
		if fields == nil {
			sc.Unknown++
			return
		}
	}
	for i := range fields {
		fd := &fields[i]
		if fd.needLen > f.Length {
			sc.DecodeErrors++
			continue
		}
		raw := fd.extract(le, be)
		var val float64
		var rawInt int64
		if fd.float {
			val = float64(math.Float32frombits(uint32(raw)))*fd.scale + fd.offset
			rawInt = int64(raw)
		} else {
			rawInt = int64(raw)
			if fd.signed && fd.bits < 64 && raw&(1<<(fd.bits-1)) != 0 {
				rawInt = int64(raw | ^fd.mask)
			}
			val = float64(rawInt)*fd.scale + fd.offset
		}
		fd.store(v, msg.T, rawInt, val, sc)
	}
}

// extract pulls the field's raw bits from the payload loaded both ways.
func (fd *fieldDec) extract(le, be uint64) uint64 {
	if fd.big {
		return (be >> fd.shift) & fd.mask
	}
	return (le >> fd.shift) & fd.mask
}

func (fd *fieldDec) store(v *Values, t, raw int64, val float64, sc *SourceCounters) {
	if math.IsNaN(val) || math.IsInf(val, 0) {
		sc.DecodeErrors++
		return
	}
	s := fd.slot
	flag := FlagOK
	for _, inv := range fd.invalid {
		if raw == inv {
			flag = FlagInvalid
			break
		}
	}
	if flag == FlagOK && fd.ranged && (val < fd.lo || val > fd.hi) {
		flag = FlagFault
	}
	v.V[s], v.Raw[s], v.T[s], v.Flag[s] = val, raw, t, flag
	v.Updated = append(v.Updated, s)
}

func (m *Map) decodeLine(msg *bus.Message, src int, sc *SourceCounters, v *Values) {
	matched := false
	for _, li := range m.byLineSrc[src] {
		ld := &m.lines[li]
		sub := ld.spec.Re.FindStringSubmatchIndex(msg.Text)
		if sub == nil {
			continue
		}
		matched = true
		sc.Patterns[li]++
		for fi := range ld.fields {
			lf := &ld.fields[fi]
			f := lf.f
			text := group(msg.Text, sub, f.Group)
			num, err := parseNumber(text)
			if err != nil {
				sc.DecodeErrors++
				continue
			}
			slot := lf.static
			if f.IndexGroup >= 0 {
				idx, err := strconv.Atoi(group(msg.Text, sub, f.IndexGroup))
				if err != nil {
					sc.DecodeErrors++
					continue
				}
				name, ok := f.Resolve(idx)
				if !ok {
					sc.DecodeErrors++
					continue
				}
				slot = lf.byName[name]
			}
			fd := fieldDec{slot: slot, scale: f.Scale, offset: f.Offset, invalid: f.Invalid}
			if f.Range != nil {
				fd.ranged, fd.lo, fd.hi = true, f.Range[0], f.Range[1]
			}
			raw := int64(num)
			fd.store(v, msg.T, raw, num*f.Scale+f.Offset, sc)
		}
	}
	if !matched {
		sc.Unknown++
	}
}

func group(s string, sub []int, g int) string {
	if 2*g+1 >= len(sub) || sub[2*g] < 0 {
		return ""
	}
	return s[sub[2*g]:sub[2*g+1]]
}

// parseNumber reads a console number: decimal, with a sign or fraction, or 0x hex.
func parseNumber(s string) (float64, error) {
	if len(s) > 2 && s[0] == '0' && (s[1] == 'x' || s[1] == 'X') {
		n, err := strconv.ParseUint(s[2:], 16, 64)
		return float64(n), err
	}
	f, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return 0, err
	}
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return 0, fmt.Errorf("not a finite number: %q", s)
	}
	return f, nil
}
