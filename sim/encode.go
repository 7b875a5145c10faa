package sim

import (
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
	"strings"

	"go.einride.tech/can"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
)

// Encoder is the inverse of the decoder: from a value for each of a compiled
// profile's slots it builds the CAN frames and console lines that decode to
// those values, using the profile's own field layouts and line patterns. It
// also schedules them at the profile's periods. Not safe for concurrent use.
type Encoder struct {
	m      *decode.Map
	frames []frameSched
	lines  []lineSched
	warn   []string
}

// Warnings lists what the encoder cannot write: line patterns it cannot
// generate text for, groups that take no number. Those lines are skipped.
func (e *Encoder) Warnings() []string { return e.warn }

// encField is one expanded CAN field with the slot its value comes from and
// the bounds of its raw value.
type encField struct {
	f      *config.CANField
	slot   int
	lo, hi float64 // raw bounds at the field's width
	mask   uint64
	shift  uint // left shift into the word loaded in the field's byte order
}

func newEncField(f *config.CANField, slot int) encField {
	bits := f.Layout.Bits
	ef := encField{f: f, slot: slot, mask: math.MaxUint64, shift: f.Layout.Shift()}
	if bits < 64 {
		ef.mask = 1<<uint(bits) - 1
	}
	if f.Signed {
		ef.lo, ef.hi = -math.Ldexp(1, bits-1), math.Ldexp(1, bits-1)-1
	} else {
		ef.lo, ef.hi = 0, math.Ldexp(1, bits)-1
	}
	return ef
}

// frameMsg is one message of a frame entry: one ID and one mux value.
type frameMsg struct {
	muxLE  uint64 // the mux selector's bits, in the little-endian word
	src    uint16
	id     uint32
	ext    bool
	hasMux bool
	mux    int64
	muxL   config.Layout
	length uint8
	fields []encField
}

// frameSched is one [[frame]] entry: its messages sent in turn, one every
// period (so each binding comes every period × span, as the staleness rule
// of the profile language expects).
type frameSched struct {
	msgs     []frameMsg
	periodNs int64
	next     int64 // data time of the next message, ns from the start
	k        int   // which message is next
}

// lineInst is one line of a pattern: its fields for one index.
type lineInst struct {
	idx    int // the printed index (index group text), -1 for static lines
	fields []lineFieldVal
	hints  []int // per field, the number form that fitted last (formatNum)
}

type lineFieldVal struct {
	f    *config.LineField
	slot int
}

// lineSched is one [[line]]: every instance (each cell, say) each period.
type lineSched struct {
	src      uint16
	gen      *lineGen
	insts    []lineInst
	periodNs int64
	next     int64
}

// NewEncoder prepares the encoder for a compiled profile.
func NewEncoder(m *decode.Map) (*Encoder, error) {
	e := &Encoder{m: m}
	p := m.Profile()
	fields := m.Fields()
	byEntry := map[int]int{} // frame entry index → e.frames index
	type msgKey struct {
		entry int
		id    uint32
		ext   bool
		mux   int64
	}
	msgAt := map[msgKey][2]int{}
	for i := range fields {
		f := &fields[i]
		entry, err := entryIndex(f.Path)
		if err != nil {
			return nil, err
		}
		fi, ok := byEntry[entry]
		if !ok {
			period := int64(1000)
			if entry < len(p.Frames) && p.Frames[entry].PeriodMs > 0 {
				period = p.Frames[entry].PeriodMs
			}
			fi = len(e.frames)
			byEntry[entry] = fi
			e.frames = append(e.frames, frameSched{periodNs: period * 1e6})
		}
		fs := &e.frames[fi]
		k := msgKey{entry, f.ID, f.Extended, f.Mux}
		at, ok := msgAt[k]
		if !ok {
			at = [2]int{fi, len(fs.msgs)}
			msgAt[k] = at
			fm := frameMsg{src: uint16(f.Src), id: f.ID, ext: f.Extended,
				hasMux: f.HasMux, mux: f.Mux, muxL: f.MuxLayout, length: 8}
			if f.HasMux {
				var d [8]byte
				decode.Insert(&d, f.MuxLayout, uint64(f.Mux))
				fm.muxLE = binary.LittleEndian.Uint64(d[:])
			}
			fs.msgs = append(fs.msgs, fm)
		}
		slot, ok := m.SlotIndex(f.Name)
		if !ok {
			return nil, fmt.Errorf("encoder: field %s binds %s, which has no slot", f.Path, f.Name)
		}
		msg := &fs.msgs[at[1]]
		msg.fields = append(msg.fields, newEncField(f, slot))
	}
	// stagger the entries a little so that they do not all fall on one instant
	for k := range e.frames {
		e.frames[k].next = int64(k) * 1e6
	}

	for li, spec := range m.Lines() {
		gen, err := newLineGen(spec.Re)
		if err != nil {
			return nil, fmt.Errorf("encoder: %s: %w", spec.Path, err)
		}
		ls := lineSched{src: uint16(spec.Src), gen: gen, periodNs: int64(1e9), next: int64(li)*1e6 + 5e5}
		if li < len(p.Lines) && p.Lines[li].PeriodMs > 0 {
			ls.periodNs = p.Lines[li].PeriodMs * 1e6
		}
		// the index group of the first templated field decides the instances
		var tmpl *config.LineField
		for fi := range spec.Fields {
			if spec.Fields[fi].IndexGroup >= 0 {
				tmpl = &spec.Fields[fi]
				break
			}
		}
		var idxs []int
		if tmpl == nil {
			idxs = []int{-1}
		} else {
			for _, name := range tmpl.Names {
				b, err := config.ParseBinding(name)
				if err != nil {
					return nil, fmt.Errorf("encoder: %s: %w", spec.Path, err)
				}
				idxs = append(idxs, b.Index+tmpl.IndexBase-1)
			}
		}
		for _, idx := range idxs {
			inst := lineInst{idx: idx}
			for fi := range spec.Fields {
				f := &spec.Fields[fi]
				name, ok := f.Resolve(idx)
				if !ok {
					continue
				}
				slot, ok := m.SlotIndex(name)
				if !ok {
					return nil, fmt.Errorf("encoder: %s binds %s, which has no slot", f.Path, name)
				}
				inst.fields = append(inst.fields, lineFieldVal{f: f, slot: slot})
			}
			if len(inst.fields) > 0 {
				inst.hints = make([]int, len(inst.fields))
				ls.insts = append(ls.insts, inst)
			}
		}
		if len(ls.insts) > 0 {
			inst := &ls.insts[0]
			fill := map[int]string{}
			for _, lf := range inst.fields {
				if lf.f.IndexGroup >= 0 {
					fill[lf.f.IndexGroup] = formatIndex(ls.gen, lf.f.IndexGroup, inst.idx)
				}
				if _, ok := formatFor(gen, lf.f.Group, 0); !ok {
					e.warn = append(e.warn, fmt.Sprintf("%s: group %d of %q takes no number; these lines are not simulated", lf.f.Path, lf.f.Group, spec.Re.String()))
				}
			}
			if _, err := gen.Generate(fill); err != nil {
				e.warn = append(e.warn, fmt.Sprintf("%s: %v; these lines are not simulated", spec.Path, err))
			}
		}
		e.lines = append(e.lines, ls)
	}
	return e, nil
}

// entryIndex reads the frame entry's index from a field path "frame[2].field[0]".
func entryIndex(path string) (int, error) {
	rest, ok := strings.CutPrefix(path, "frame[")
	if i := strings.IndexByte(rest, ']'); ok && i > 0 {
		if n, err := strconv.Atoi(rest[:i]); err == nil {
			return n, nil
		}
	}
	return 0, fmt.Errorf("encoder: unexpected field path %q", path)
}

// Reading is what the encoder writes for one slot: a value in the binding's
// unit, or "no reading" (the field's first invalid raw value; a field with
// none keeps Value).
type Reading struct {
	Value   float64
	Invalid bool
	// Raw: Value is the field's raw code (enums such as bms.state), written
	// as it is without scale and offset.
	Raw bool
}

// Readings holds a Reading per slot of a compiled profile, indexed like
// decode.Map.Slots.
type Readings []Reading

func (r Readings) reading(slot int) Reading { return r[slot] }

// readingSource gives the reading of a slot: a Readings slice, or the
// simulator's reporter, which computes each slot only when it is encoded.
type readingSource interface {
	reading(slot int) Reading
}

// frame builds frame message fm from the readings.
//
// The fields of one message never share bits (the profile loader checks),
// so each is ORed into a 64-bit word loaded in its own byte order, as
// decode.Insert would write it, and the two words are merged at the end.
func (e *Encoder) frame(fm *frameMsg, r readingSource) can.Frame {
	le, be := fm.muxLE, uint64(0)
	for i := range fm.fields {
		ef := &fm.fields[i]
		v := (ef.raw(r.reading(ef.slot)) & ef.mask) << ef.shift
		if ef.f.Layout.Big {
			be |= v
		} else {
			le |= v
		}
	}
	var data, b [8]byte
	binary.LittleEndian.PutUint64(data[:], le)
	binary.BigEndian.PutUint64(b[:], be)
	for i := range data {
		data[i] |= b[i]
	}
	return can.Frame{ID: fm.id, IsExtended: fm.ext, Length: fm.length, Data: data}
}

// raw is the raw field value for a reading: the inverse of the decoder's
// raw × scale + offset, rounded to the nearest count and clamped to the
// field's width (as decode.RawFor, with the bounds computed once).
func (ef *encField) raw(rd Reading) uint64 {
	f := ef.f
	if rd.Invalid && len(f.Invalid) > 0 {
		return uint64(f.Invalid[0]) & ef.mask
	}
	x := rd.Value
	if !rd.Raw {
		x = (x - f.Offset) / f.Scale
	}
	if math.IsNaN(x) || math.IsInf(x, 0) {
		x = 0
	}
	var raw uint64
	if f.Float {
		raw = uint64(math.Float32bits(float32(x)))
	} else {
		n := math.Round(x)
		if n < ef.lo {
			n = ef.lo
		} else if n > ef.hi {
			n = ef.hi
		}
		raw = uint64(int64(n)) & ef.mask
	}
	// a rounded value that lands on an "invalid" code moves one count away
	if !f.Float {
		for _, inv := range f.Invalid {
			if signExtend(raw, f) == inv {
				if raw > 0 {
					raw--
				} else {
					raw++
				}
			}
		}
	}
	return raw
}

func signExtend(raw uint64, f *config.CANField) int64 {
	bits := f.Layout.Bits
	if f.Signed && bits < 64 && raw&(1<<(bits-1)) != 0 {
		return int64(raw | ^(1<<bits - 1))
	}
	return int64(raw)
}

// lineText writes one line instance from the readings.
func (e *Encoder) lineText(ls *lineSched, inst *lineInst, r readingSource) (string, error) {
	fill := make(map[int]string, len(inst.fields)+1)
	for i, lf := range inst.fields {
		if lf.f.IndexGroup >= 0 {
			fill[lf.f.IndexGroup] = formatIndex(ls.gen, lf.f.IndexGroup, inst.idx)
		}
		rd := r.reading(lf.slot)
		num := (rd.Value - lf.f.Offset) / lf.f.Scale
		if rd.Raw {
			num = rd.Value
		}
		if rd.Invalid && len(lf.f.Invalid) > 0 {
			num = float64(lf.f.Invalid[0])
		}
		if math.IsNaN(num) || math.IsInf(num, 0) {
			num = 0
		}
		text, ok := formatFor(ls.gen, lf.f.Group, num, &inst.hints[i])
		if !ok {
			return "", fmt.Errorf("%s: no text for %g fits group %d of %q", lf.f.Path, num, lf.f.Group, ls.gen.re.String())
		}
		fill[lf.f.Group] = text
	}
	return ls.gen.Generate(fill)
}

// Next appends to dst every message due at or before t (ns from the start),
// in time order per entry, from the readings. The messages' T is the time
// they were due plus start. A line the encoder cannot write for a value is
// skipped and counted in *errs.
func (e *Encoder) Next(dst []bus.Message, t, start int64, r Readings, errs *int) []bus.Message {
	return e.next(dst, t, start, r, errs)
}

func (e *Encoder) next(dst []bus.Message, t, start int64, r readingSource, errs *int) []bus.Message {
	for k := range e.frames {
		fs := &e.frames[k]
		for fs.next <= t && len(fs.msgs) > 0 {
			fm := &fs.msgs[fs.k]
			dst = append(dst, bus.Message{T: start + fs.next, Src: fm.src, Kind: bus.KindCAN, Frame: e.frame(fm, r)})
			fs.k = (fs.k + 1) % len(fs.msgs)
			fs.next += fs.periodNs
		}
	}
	for k := range e.lines {
		ls := &e.lines[k]
		for ls.next <= t {
			for i := range ls.insts {
				text, err := e.lineText(ls, &ls.insts[i], r)
				if err != nil {
					if errs != nil {
						*errs++
					}
					continue
				}
				dst = append(dst, bus.Message{T: start + ls.next, Src: ls.src, Kind: bus.KindLine, Text: text})
			}
			ls.next += ls.periodNs
		}
	}
	return dst
}

// NextDue is the earliest time (ns from the start) any message is due.
func (e *Encoder) NextDue() int64 {
	due := int64(math.MaxInt64)
	for k := range e.frames {
		if len(e.frames[k].msgs) > 0 {
			due = min(due, e.frames[k].next)
		}
	}
	for k := range e.lines {
		due = min(due, e.lines[k].next)
	}
	return due
}

// Frames lists every frame message the encoder knows (one per ID and mux
// value) built from the readings, for tests and load generators.
func (e *Encoder) Frames(r Readings) []bus.Message {
	var out []bus.Message
	for k := range e.frames {
		for i := range e.frames[k].msgs {
			fm := &e.frames[k].msgs[i]
			out = append(out, bus.Message{Src: fm.src, Kind: bus.KindCAN, Frame: e.frame(fm, r)})
		}
	}
	return out
}

// Lines lists every console line the encoder writes (each instance of each
// pattern) from the readings.
func (e *Encoder) Lines(r Readings) ([]bus.Message, error) {
	var out []bus.Message
	for k := range e.lines {
		ls := &e.lines[k]
		for i := range ls.insts {
			text, err := e.lineText(ls, &ls.insts[i], r)
			if err != nil {
				return out, err
			}
			out = append(out, bus.Message{Src: ls.src, Kind: bus.KindLine, Text: text})
		}
	}
	return out, nil
}
