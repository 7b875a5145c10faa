package pack

import (
	"cmp"
	"encoding/hex"
	"slices"
)

// BusView is what the bus page shows: per source, every CAN ID seen with its
// count, rate, latest data and decoded fields, and the bus load.
type BusView struct {
	DataT   Num         `json:"data_t"`
	Sources []BusSource `json:"sources"`
}

// BusSource is one source of one pack as the bus page shows it.
type BusSource struct {
	Pack         string `json:"pack"`
	Src          int    `json:"src"` // the profile's source index
	Name         string `json:"name"`
	Kind         string `json:"kind"`
	Device       string `json:"device"`
	Mode         string `json:"mode,omitempty"`
	Bitrate      int    `json:"bitrate,omitempty"`
	State        string `json:"state"`
	Reason       string `json:"reason,omitempty"`
	Messages     uint64 `json:"messages"`
	Unknown      uint64 `json:"unknown"`
	DecodeErrors uint64 `json:"decode_errors"`
	ErrorFrames  uint64 `json:"error_frames"`
	Gaps         uint64 `json:"gaps"`
	RateHz       Num    `json:"rate_hz"`
	// LoadPct is the bus load with worst-case bit stuffing; LoadPctUnstuffed
	// without stuff bits. Both nil when the bitrate is unknown.
	LoadPct          *Num         `json:"load_pct"`
	LoadPctUnstuffed *Num         `json:"load_pct_unstuffed"`
	IDs              []BusID      `json:"ids"`
	Patterns         []BusPattern `json:"patterns,omitempty"`
	LastLine         string       `json:"last_line,omitempty"`
	Diagnosis        string       `json:"diagnosis,omitempty"`
}

// BusID is one CAN ID seen on a source.
type BusID struct {
	ID       uint32     `json:"id"`
	Extended bool       `json:"extended"`
	Hex      string     `json:"id_hex"`
	Count    uint64     `json:"count"`
	RateHz   Num        `json:"rate_hz"`
	Len      int        `json:"len"`
	Data     string     `json:"data"` // latest payload, hex
	Age      *Num       `json:"age_s"`
	Known    bool       `json:"known"`
	Fields   []BusField `json:"fields,omitempty"`
}

// BusField is one decoded value of a frame.
type BusField struct {
	Bind  string `json:"bind"`
	Value *Num   `json:"value"`
	Text  string `json:"text,omitempty"`
	Unit  string `json:"unit,omitempty"`
	State string `json:"state"`
}

// BusPattern counts the lines one console pattern matched.
type BusPattern struct {
	Pattern string `json:"pattern"`
	Count   uint64 `json:"count"`
}

// busKey identifies one ID of one source of one pack for rate keeping.
type busKey struct {
	pack, src int
	id        uint32
}

// busPrev keeps the counts of the previous BusView to work out rates over
// at least a second of data time.
type busPrev struct {
	t      int64
	counts map[busKey]uint64
	rates  map[busKey]float64
}

// BusView builds the bus page's view at the latest data time. ID rates are
// over the data time since the previous call that was at least a second
// earlier (before that, the average since the ID was first seen).
func (e *Engine) BusView() BusView {
	e.mu.Lock()
	defer e.mu.Unlock()
	now := e.dataT
	bp := &e.bus
	roll := bp.counts == nil || now-bp.t >= secondNs
	var counts map[busKey]uint64
	if roll {
		counts = make(map[busKey]uint64)
		if bp.rates == nil {
			bp.rates = make(map[busKey]float64)
		}
	}
	view := BusView{DataT: Num(float64(now) / 1e9)}
	for pi, ps := range e.packs {
		vals := ps.valueSnaps(now)
		fieldsOf := ps.fieldsByID()
		for i := range ps.prof.Sources {
			src := &ps.prof.Sources[i]
			sc := &ps.v.Src[i]
			bs := BusSource{Pack: ps.id, Src: i, Name: src.Name, Kind: src.Kind, Device: src.Device,
				Mode: src.Mode, Bitrate: src.Bitrate, State: "unknown",
				Messages: sc.Messages, Unknown: sc.Unknown, DecodeErrors: sc.DecodeErrors,
				ErrorFrames: sc.ErrorFrames, Gaps: sc.Gaps, RateHz: num(ps.rateHz[i]),
				LastLine: sc.LastLine, Diagnosis: diagnose(src, sc, ps.errRate[i], now)}
			if st, ok := ps.statusOf(i, e.status); ok {
				bs.State, bs.Reason = st.state.String(), st.reason
			}
			var bitsWC, bitsNS float64
			for key, st := range sc.IDs {
				k := busKey{pi, i, key}
				rate := 0.0
				if r, ok := bp.rates[k]; ok {
					rate = r
				} else if st.LastT > st.FirstT {
					rate = float64(st.Count-1) * 1e9 / float64(st.LastT-st.FirstT)
				}
				if roll {
					if prev, ok := bp.counts[k]; ok && now > bp.t {
						rate = float64(st.Count-prev) * 1e9 / float64(now-bp.t)
					}
					counts[k] = st.Count
					bp.rates[k] = rate
				}
				ext := key&(1<<31) != 0
				n := int(st.Len)
				bitsWC += rate * float64(FrameBits(n, ext, true))
				bitsNS += rate * float64(FrameBits(n, ext, false))
				id := BusID{ID: key &^ (1 << 31), Extended: ext, Hex: idHex(key), Count: st.Count,
					RateHz: num(rate), Len: n, Data: hex.EncodeToString(st.Data[:min(n, 8)]),
					Age: numPtr(secs(now - st.LastT)), Known: st.Known}
				for _, s := range fieldsOf[i][key] {
					v := &vals[s]
					id.Fields = append(id.Fields, BusField{Bind: v.Bind, Value: v.Value, Text: v.Text, Unit: v.Unit, State: v.State})
				}
				bs.IDs = append(bs.IDs, id)
			}
			slices.SortFunc(bs.IDs, func(a, b BusID) int {
				if c := cmp.Compare(boolInt(a.Extended), boolInt(b.Extended)); c != 0 {
					return c
				}
				return cmp.Compare(a.ID, b.ID)
			})
			if isCANSource(src.Kind) {
				bs.LoadPct = numPtr(BusLoadPct(bitsWC, src.Bitrate))
				bs.LoadPctUnstuffed = numPtr(BusLoadPct(bitsNS, src.Bitrate))
			}
			for li, ln := range ps.m.Lines() {
				if ln.Src == i && li < len(sc.Patterns) {
					bs.Patterns = append(bs.Patterns, BusPattern{Pattern: ln.Re.String(), Count: sc.Patterns[li]})
				}
			}
			view.Sources = append(view.Sources, bs)
		}
	}
	if roll {
		bp.counts, bp.t = counts, now
	}
	return view
}

func boolInt(b bool) int {
	if b {
		return 1
	}
	return 0
}

// fieldsByID lists, per profile source and ID key (bit 31 for extended),
// the slots the frame's fields write, each once.
func (ps *packState) fieldsByID() []map[uint32][]int32 {
	if ps.idSlots != nil {
		return ps.idSlots
	}
	out := make([]map[uint32][]int32, ps.nsrc)
	for i := range out {
		out[i] = map[uint32][]int32{}
	}
	for _, f := range ps.m.Fields() {
		if f.Src < 0 || f.Src >= ps.nsrc {
			continue
		}
		s, ok := ps.m.SlotIndex(f.Name)
		if !ok {
			continue
		}
		key := f.ID
		if f.Extended {
			key |= 1 << 31
		}
		if !slices.Contains(out[f.Src][key], int32(s)) {
			out[f.Src][key] = append(out[f.Src][key], int32(s))
		}
	}
	ps.idSlots = out
	return out
}
