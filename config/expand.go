package config

import (
	"fmt"
	"regexp"
	"sort"
	"strconv"
	"strings"
)

// Layout is where a field's raw bits sit in a CAN payload.
//
// Positions count in the field's own stream order. Little order: Start is
// byte*8 + bit of the value's least significant bit, and the value continues
// upward into bit 0 of the next byte. Big order: Start is byte*8 + (7 - bit)
// of the value's most significant bit, and the value continues downward into
// bit 7 of the next byte. A byte-aligned field of size n is the same thing
// with bit 0 (little) or bit 7 (big) and n*8 bits.
type Layout struct {
	Start int
	Bits  int
	Big   bool
}

// NeedLen is the payload length in bytes the field needs.
func (l Layout) NeedLen() int {
	return (l.Start+l.Bits-1)/8 + 1
}

// Mask is the set of payload bits the field occupies, as bit i of a
// little-endian 64-bit load (bit i is bit i%8 of byte i/8).
func (l Layout) Mask() uint64 {
	var m uint64
	for s := l.Start; s < l.Start+l.Bits && s < 64; s++ {
		if l.Big {
			m |= 1 << (s/8*8 + 7 - s%8)
		} else {
			m |= 1 << s
		}
	}
	return m
}

// Shift is the right shift that brings the field to bit 0 after loading the
// payload as a 64-bit integer in the field's own byte order (little-endian
// load for little order, big-endian load for big order).
func (l Layout) Shift() uint {
	if l.Big {
		return uint(64 - l.Start - l.Bits)
	}
	return uint(l.Start)
}

// CANField is one fully expanded field of a CAN frame: one ID, one mux value,
// one position of a range.
type CANField struct {
	Path      string // "frame[0].field[1]", for messages
	Bind      Binding
	Name      string
	Src       int
	ID        uint32
	Extended  bool
	HasMux    bool
	Mux       int64
	MuxLayout Layout
	Layout    Layout
	Signed    bool
	Float     bool
	Scale     float64
	Offset    float64
	Invalid   []int64
	Range     *[2]float64
	Enum      map[int64]string
	Unit      string
	PeriodNs  int64
}

// LineField is one field of a console line pattern.
type LineField struct {
	Path  string
	Group int // submatch index of the value
	// Static is the binding when the bind has no template; else "".
	Static string
	// Template: the bind's position comes from IndexGroup's number.
	tmpl       bindTemplate
	IndexGroup int // submatch index, -1 when static
	IndexBase  int
	Scale      float64
	Offset     float64
	Invalid    []int64
	Range      *[2]float64
	Enum       map[int64]string
	Unit       string
	PeriodNs   int64
	// Names lists every binding the field can produce, for slots.
	Names []string
}

// Resolve gives the binding for a line whose index group printed idx.
func (f *LineField) Resolve(idx int) (string, bool) {
	if f.IndexGroup < 0 {
		return f.Static, true
	}
	n := idx - f.IndexBase + 1
	names, err := f.tmpl.expand(map[string]int{f.tmpl.Vars[0]: n})
	if err != nil || len(names) != 1 {
		return "", false
	}
	return names[0], contains(f.Names, names[0])
}

// LineSpec is one compiled [[line]].
type LineSpec struct {
	Path   string
	Src    int
	Re     *regexp.Regexp
	Fields []LineField
}

// Expanded is a profile with every range and template expanded.
type Expanded struct {
	CAN   []CANField
	Lines []LineSpec
	// Bindings lists every binding name the profile can produce, sorted.
	Bindings []string
}

// Expanded returns the expanded form of a loaded profile.
func (p *Profile) Expanded() *Expanded { return p.exp }

const defaultPeriodMs = 1000

func isCANKind(k string) bool { return k == "socketcan" || k == "serial-can" || k == "tcp-can" }

// sourceFor resolves a frame's or line's source name to an index.
func sourceFor(p *Profile, name string, can bool) (int, error) {
	if name != "" {
		for i, s := range p.Sources {
			if s.Name == name {
				if isCANKind(s.Kind) != can {
					if can {
						return -1, fmt.Errorf("source %q is %s, not a CAN source", name, s.Kind)
					}
					return -1, fmt.Errorf("source %q is %s, not a text console", name, s.Kind)
				}
				return i, nil
			}
		}
		return -1, fmt.Errorf("no [[source]] named %q", name)
	}
	for i, s := range p.Sources {
		if isCANKind(s.Kind) == can {
			return i, nil
		}
	}
	if can {
		return -1, fmt.Errorf("no CAN source (socketcan, serial-can or tcp-can) for this frame")
	}
	return -1, fmt.Errorf("no serial-text source for this line")
}

// keyError is an error about one key of a table.
type keyError struct {
	key string
	msg string
}

func (e *keyError) Error() string { return e.msg }

func keyErr(key, format string, args ...any) error {
	return &keyError{key: key, msg: fmt.Sprintf(format, args...)}
}

// errKey is the key an error from fieldLayout is about, "" for the table.
func errKey(err error) string {
	if ke, ok := err.(*keyError); ok {
		return "." + ke.key
	}
	return ""
}

// fieldLayout computes a field's layout and element stride from its keys.
func fieldLayout(f *Field) (Layout, int, error) {
	if f.Byte == nil {
		return Layout{}, 0, keyErr("", "byte is required")
	}
	b := *f.Byte
	if b < 0 || b > 7 {
		return Layout{}, 0, keyErr("byte", "byte %d is outside 0..7", b)
	}
	big := false
	switch f.Order {
	case "", "little":
	case "big":
		big = true
	default:
		return Layout{}, 0, keyErr("order", "order %q: use \"little\" or \"big\"", f.Order)
	}
	if f.Bit != nil || f.Bits != 0 {
		if f.Size != 0 {
			return Layout{}, 0, keyErr("size", "give either size (bytes) or bit and bits, not both")
		}
		bit := 0
		if f.Bit != nil {
			bit = *f.Bit
		}
		if bit < 0 || bit > 7 {
			return Layout{}, 0, keyErr("bit", "bit %d is outside 0..7", bit)
		}
		n := f.Bits
		if n == 0 {
			n = 1
		}
		if n < 1 || n > 32 {
			return Layout{}, 0, keyErr("bits", "bits %d is outside 1..32", n)
		}
		if big {
			return Layout{Start: b*8 + 7 - bit, Bits: n, Big: true}, n, nil
		}
		return Layout{Start: b*8 + bit, Bits: n}, n, nil
	}
	size := f.Size
	if size == 0 {
		size = 1
	}
	if size < 1 || size > 4 {
		return Layout{}, 0, keyErr("size", "size %d is outside 1..4 bytes", size)
	}
	return Layout{Start: b * 8, Bits: size * 8, Big: big}, size * 8, nil
}

func muxLayout(m *Mux) (Layout, error) {
	f := Field{Byte: &m.Byte, Bit: m.Bit, Bits: m.Bits, Size: m.Size, Order: m.Order}
	l, _, err := fieldLayout(&f)
	return l, err
}

// frameIDs gives the IDs a frame covers.
func frameIDs(fr *Frame) ([]uint32, bool, error) {
	from, to, err := parseIntRange(fr.ID)
	if err != nil {
		return nil, false, fmt.Errorf("id: %w", err)
	}
	if from < 0 || to > 0x1FFFFFFF {
		return nil, false, fmt.Errorf("id 0x%X is outside 0..0x1FFFFFFF", to)
	}
	if to-from > 255 {
		return nil, false, fmt.Errorf("id range spans %d IDs; at most 256", to-from+1)
	}
	ext := to > 0x7FF
	if fr.Extended != nil {
		if !*fr.Extended && ext {
			return nil, false, fmt.Errorf("id 0x%X does not fit 11 bits; set extended = true or fix the id", to)
		}
		ext = *fr.Extended
	}
	ids := make([]uint32, 0, to-from+1)
	for id := from; id <= to; id++ {
		ids = append(ids, uint32(id))
	}
	return ids, ext, nil
}

func convEnum(e map[string]string) (map[int64]string, error) {
	if e == nil {
		return nil, nil
	}
	out := make(map[int64]string, len(e))
	for k, v := range e {
		n, err := strconv.ParseInt(k, 0, 64)
		if err != nil {
			return nil, fmt.Errorf("enum key %q is not a whole number", k)
		}
		out[n] = v
	}
	return out, nil
}

// expand turns the validated profile into its expanded form, reporting
// layout, binding and overlap problems with positions.
func expand(p *Profile, r *reporter) (*Expanded, bool) {
	exp := &Expanded{}
	names := map[string]bool{}
	ok := true
	bad := func(path string, kind error, hint, format string, args ...any) {
		r.errorf(path, kind, hint, format, args...)
		ok = false
	}
	type idKey struct {
		src int
		id  uint32
		ext bool
	}
	idOwner := map[idKey]int{}
	type occKey struct {
		idKey
		mux int64
	}
	occupied := map[occKey]uint64{}
	occupant := map[occKey][]string{}

	for fi := range p.Frames {
		fr := &p.Frames[fi]
		fpath := fmt.Sprintf("frame[%d]", fi)
		src, err := sourceFor(p, fr.Source, true)
		if err != nil {
			bad(fpath+".source", ErrConflict, "name a [[source]] of kind socketcan, serial-can or tcp-can", "%v", err)
			continue
		}
		ids, ext, err := frameIDs(fr)
		if err != nil {
			bad(fpath+".id", ErrRange, `write id = 0x4C0, or id = "0x500..0x50F" for one layout on several IDs`, "%v", err)
			continue
		}
		for _, id := range ids {
			k := idKey{src, id, ext}
			if prev, dup := idOwner[k]; dup && prev != fi {
				bad(fpath+".id", ErrConflict, fmt.Sprintf("merge the fields into frame[%d] (line %d), or put them on another source", prev, r.at(fmt.Sprintf("frame[%d]", prev), false).Line), "duplicate ID 0x%X on source %q: frame[%d] already describes it", id, p.Sources[src].Name, prev)
				break
			}
			idOwner[k] = fi
		}
		var ml Layout
		if fr.Mux != nil {
			ml, err = muxLayout(fr.Mux)
			if err != nil {
				bad(fpath+".mux", ErrLayout, "mux = { byte = 0 } reads byte 0; add bit and bits for a smaller selector", "mux: %v", err)
				continue
			}
		}
		periodMs := fr.PeriodMs
		if periodMs <= 0 {
			periodMs = defaultPeriodMs
		}
		// number of mux values the frame cycles through
		muxVals := map[int64]bool{}
		for _, f := range fr.Fields {
			if f.Mux != nil {
				if a, b, err := parseIntRange(f.Mux); err == nil {
					for m := a; m <= b && m-a < 4096; m++ {
						muxVals[m] = true
					}
				}
			}
		}
		span := int64(len(ids)) * int64(max(1, len(muxVals)))
		for ki := range fr.Fields {
			f := &fr.Fields[ki]
			path := fmt.Sprintf("%s.field[%d]", fpath, ki)
			lay, stride, err := fieldLayout(f)
			if err != nil {
				bad(path+errKey(err), ErrLayout, "see \"Fields\" in the README for byte, size, bit and bits", "%v", err)
				continue
			}
			if f.Float && (lay.Bits != 32) {
				bad(path+".float", ErrLayout, "float = true reads an IEEE 754 single: set size = 4", "float needs size = 4")
				continue
			}
			var muxFrom, muxTo int64
			hasMux := f.Mux != nil
			switch {
			case hasMux && fr.Mux == nil:
				bad(path+".mux", ErrConflict, "add mux = { byte = N } to the [[frame]], or remove mux from the field", "field has mux but its frame has no mux selector")
				continue
			case !hasMux && fr.Mux != nil:
				bad(path, ErrConflict, `add mux = "0..3" (the selector values this field applies to)`, "frame has a mux selector but this field has no mux value")
				continue
			case hasMux:
				muxFrom, muxTo, err = parseIntRange(f.Mux)
				if err != nil {
					bad(path+".mux", ErrRange, `write mux = 2 or mux = "0..3"`, "mux: %v", err)
					continue
				}
			}
			tmpl, err := parseBindTemplate(f.Bind)
			if err != nil {
				bad(path+".bind", ErrBinding, "see \"Bindings\" in the README", "bind %q: %v", f.Bind, err)
				continue
			}
			for _, v := range tmpl.Vars {
				if v != "mux" && v != "id" {
					bad(path+".bind", ErrBinding, "in a frame, templates may use {mux} and {id}", "bind %q: {%s} is not known in a frame", f.Bind, v)
					goto nextField
				}
				if v == "mux" && !hasMux {
					bad(path+".bind", ErrBinding, "give the field a mux value or range", "bind %q uses {mux} but the field has no mux", f.Bind)
					goto nextField
				}
			}
			{
				scale, enum, rng, ok := fieldValue(f, path, bad)
				if !ok {
					continue
				}
				period := periodMs * span
				if f.PeriodMs > 0 {
					period = f.PeriodMs
				}
				if !hasMux {
					muxFrom, muxTo = 0, 0
				}
				for idIdx, id := range ids {
					for m := muxFrom; m <= muxTo; m++ {
						binds, err := tmpl.expand(map[string]int{"mux": int(m), "id": idIdx})
						if err != nil {
							bad(path+".bind", ErrBinding, "check the range's ends", "bind %q: %v", f.Bind, err)
							goto nextField
						}
						for bi, name := range binds {
							b, err := ParseBinding(name)
							if err != nil {
								bad(path+".bind", ErrBinding, bindHint(name), "bind %q: %v", f.Bind, err)
								goto nextField
							}
							if msg := checkIndex(p, b); msg != "" {
								bad(path+".bind", ErrRange, "raise [pack] cells or temp_sensors, or fix the range", "bind %q gives %s: %s", f.Bind, name, msg)
								goto nextField
							}
							l := lay
							l.Start += bi * stride
							if l.NeedLen() > 8 || l.Start+l.Bits > 64 {
								bad(path+".byte", ErrLayout, "a classical CAN frame has bytes 0..7; check byte, size and the range length", "%s (position %d of the range) runs past byte 7", name, bi+1)
								goto nextField
							}
							k := occKey{idKey{src, id, ext}, m}
							mask := l.Mask()
							if occupied[k]&mask != 0 {
								bad(path+".byte", ErrConflict, "fields in one frame (and one mux value) must not share bits", "%s overlaps %s in ID 0x%X", name, strings.Join(occupant[k], ", "), id)
								goto nextField
							}
							occupied[k] |= mask
							occupant[k] = append(occupant[k], name)
							exp.CAN = append(exp.CAN, CANField{
								Path: path, Bind: b, Name: name, Src: src, ID: id, Extended: ext,
								HasMux: hasMux, Mux: m, MuxLayout: ml, Layout: l,
								Signed: f.Signed, Float: f.Float, Scale: scale, Offset: f.Offset,
								Invalid: f.Invalid, Range: rng, Enum: enum, Unit: unitOf(f, b),
								PeriodNs: period * 1e6,
							})
							names[name] = true
						}
					}
				}
			}
		nextField:
		}
		// a mux value that selects the mux byte itself is a layout error
		if fr.Mux != nil {
			for _, cf := range exp.CAN {
				if strings.HasPrefix(cf.Path, fpath+".") && cf.Layout.Mask()&ml.Mask() != 0 {
					bad(cf.Path+".byte", ErrConflict, "move the field off the mux selector's bits", "%s overlaps the mux selector", cf.Name)
					break
				}
			}
		}
	}

	for li := range p.Lines {
		ln := &p.Lines[li]
		path := fmt.Sprintf("line[%d]", li)
		src, err := sourceFor(p, ln.Source, false)
		if err != nil {
			bad(path+".source", ErrConflict, "name a [[source]] of kind serial-text", "%v", err)
			continue
		}
		re, err := regexp.Compile(ln.Pattern)
		if err != nil {
			bad(path+".pattern", ErrSyntax, "patterns are RE2 (Go regexp); use single quotes '…' so backslashes stay as written", "bad pattern: %v", err)
			continue
		}
		spec := LineSpec{Path: path, Src: src, Re: re}
		periodMs := ln.PeriodMs
		if periodMs <= 0 {
			periodMs = defaultPeriodMs
		}
		for ki := range ln.Fields {
			f := &ln.Fields[ki]
			fpath := fmt.Sprintf("%s.field[%d]", path, ki)
			gi := re.SubexpIndex(f.Group)
			if f.Group == "" || gi < 0 {
				bad(fpath+".group", ErrBinding, "groups in this pattern: "+strings.Join(groupNames(re), ", "), "group %q is not a named group (?P<name>…) of the pattern", f.Group)
				continue
			}
			tmpl, err := parseBindTemplate(f.Bind)
			if err != nil {
				bad(fpath+".bind", ErrBinding, "see \"Bindings\" in the README", "bind %q: %v", f.Bind, err)
				continue
			}
			scale, enum, rng, ok := fieldValue(f, fpath, bad)
			if !ok {
				continue
			}
			base := 1
			if f.IndexBase != nil {
				base = *f.IndexBase
			}
			lf := LineField{Path: fpath, Group: gi, IndexGroup: -1, IndexBase: base, Scale: scale, Offset: f.Offset,
				Invalid: f.Invalid, Range: rng, Enum: enum, PeriodNs: periodMs * 1e6}
			if f.PeriodMs > 0 {
				lf.PeriodNs = f.PeriodMs * 1e6
			}
			switch {
			case len(tmpl.Vars) == 0 && !tmpl.IsRange:
				b, err := ParseBinding(f.Bind)
				if err != nil {
					bad(fpath+".bind", ErrBinding, bindHint(f.Bind), "%v", err)
					continue
				}
				if msg := checkIndex(p, b); msg != "" {
					bad(fpath+".bind", ErrRange, "raise [pack] cells or temp_sensors", "bind %q: %s", f.Bind, msg)
					continue
				}
				lf.Static, lf.Names, lf.Unit = b.String(), []string{b.String()}, unitOf(f, b)
			case len(tmpl.Vars) == 1 && !tmpl.IsRange:
				ig := re.SubexpIndex(tmpl.Vars[0])
				if ig < 0 {
					bad(fpath+".bind", ErrBinding, "groups in this pattern: "+strings.Join(groupNames(re), ", "), "bind %q: {%s} is not a named group of the pattern", f.Bind, tmpl.Vars[0])
					continue
				}
				lf.tmpl, lf.IndexGroup = tmpl, ig
				probe, _ := tmpl.expand(map[string]int{tmpl.Vars[0]: 1})
				b, err := ParseBinding(probe[0])
				if err != nil || !b.Kind.Indexed() {
					bad(fpath+".bind", ErrBinding, bindHint(f.Bind), "bind %q: not an indexed binding such as cell[{n}].voltage", f.Bind)
					continue
				}
				lf.Unit = unitOf(f, b)
				for i := 1; i <= indexCount(p, b.Kind); i++ {
					b.Index = i
					lf.Names = append(lf.Names, b.String())
				}
			default:
				bad(fpath+".bind", ErrBinding, "a line field binds one value; use {group} for the position", "bind %q: ranges are for frames; a line binds one value per field", f.Bind)
				continue
			}
			for _, n := range lf.Names {
				names[n] = true
			}
			spec.Fields = append(spec.Fields, lf)
		}
		exp.Lines = append(exp.Lines, spec)
	}
	for n := range names {
		exp.Bindings = append(exp.Bindings, n)
	}
	sortBindings(exp.Bindings)
	return exp, ok
}

// fieldValue checks a field's conversion keys: scale (not 0), enum (whole
// number codes) and range (min below max); each problem is reported at its key.
func fieldValue(f *Field, path string, bad func(path string, kind error, hint, format string, args ...any)) (scale float64, enum map[int64]string, rng *[2]float64, ok bool) {
	scale = 1
	if f.Scale != nil {
		scale = *f.Scale
	}
	if scale == 0 {
		bad(path+".scale", ErrRange, "value = raw × scale + offset; a negative scale flips a sign", "scale must not be 0")
		return 0, nil, nil, false
	}
	enum, err := convEnum(f.Enum)
	if err != nil {
		bad(path+".enum", ErrType, `write enum = { 0 = "idle", 1 = "charging" }`, "%v", err)
		return 0, nil, nil, false
	}
	rng, err = fieldRange(f)
	if err != nil {
		bad(path+".range", ErrRange, "range = [min, max] with min below max, in the value's unit", "%v", err)
		return 0, nil, nil, false
	}
	return scale, enum, rng, true
}

func groupNames(re *regexp.Regexp) []string {
	var out []string
	for _, n := range re.SubexpNames() {
		if n != "" {
			out = append(out, n)
		}
	}
	if len(out) == 0 {
		return []string{"(none: name them with (?P<name>…))"}
	}
	return out
}

func fieldRange(f *Field) (*[2]float64, error) {
	if f.Range == nil {
		return nil, nil
	}
	if len(f.Range) != 2 || !(f.Range[0] < f.Range[1]) {
		return nil, fmt.Errorf("range must be [min, max] with min < max")
	}
	return &[2]float64{f.Range[0], f.Range[1]}, nil
}

func unitOf(f *Field, b Binding) string {
	if f.Unit != "" {
		return f.Unit
	}
	return b.Unit()
}

// indexCount is how many positions an indexed kind has in this pack.
func indexCount(p *Profile, k BindKind) int {
	switch k {
	case BindCellVoltage, BindCellBalancing:
		return p.Pack.Cells
	case BindTemp:
		return p.Pack.Sensors
	case BindStringCurrent:
		return maxStrings
	}
	return 0
}

// maxStrings bounds string[N] positions: packs rarely have more parallel strings.
const maxStrings = 16

func checkIndex(p *Profile, b Binding) string {
	if !b.Kind.Indexed() {
		return ""
	}
	if n := indexCount(p, b.Kind); b.Index > n {
		what := map[BindKind]string{BindCellVoltage: "cells", BindCellBalancing: "cells", BindTemp: "temp_sensors", BindStringCurrent: "strings"}[b.Kind]
		return fmt.Sprintf("position %d is above the pack's %d %s", b.Index, n, what)
	}
	return ""
}

func bindHint(name string) string {
	cands := BindingNames()
	if c := closest(name, cands); c != "" {
		return fmt.Sprintf("did you mean %q?", c)
	}
	return "known bindings: " + strings.Join(cands, ", ")
}

// sortBindings orders names naturally: cell[2] before cell[10].
func sortBindings(names []string) {
	sort.Slice(names, func(i, j int) bool { return naturalLess(names[i], names[j]) })
}

func naturalLess(a, b string) bool {
	for a != "" && b != "" {
		da, db := digitsPrefix(a), digitsPrefix(b)
		if da > 0 && db > 0 {
			na, _ := strconv.Atoi(a[:da])
			nb, _ := strconv.Atoi(b[:db])
			if na != nb {
				return na < nb
			}
			a, b = a[da:], b[db:]
			continue
		}
		if a[0] != b[0] {
			return a[0] < b[0]
		}
		a, b = a[1:], b[1:]
	}
	return len(a) < len(b)
}

func digitsPrefix(s string) int {
	i := 0
	for i < len(s) && s[i] >= '0' && s[i] <= '9' {
		i++
	}
	return i
}
