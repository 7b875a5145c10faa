package decode

import "packwatch/config"

// Flag is the quality of a slot's latest reading.
type Flag uint8

// Reading qualities.
const (
	// FlagNone: no reading yet.
	FlagNone Flag = iota
	// FlagOK: V holds a valid value.
	FlagOK
	// FlagInvalid: the raw value was one of the field's `invalid` values ("no reading").
	FlagInvalid
	// FlagFault: the value was outside the field's plausible `range` (a sensor
	// fault); V holds the implausible value for diagnosis, never to be shown or
	// integrated as a reading.
	FlagFault
)

// Slot is one expanded binding of a compiled profile. Slots are numbered
// densely; Values holds their readings at the same index.
type Slot struct {
	Bind config.Binding
	Name string // canonical binding name, Bind.String()
	Unit string
	// Enum names raw codes (bms.state, fault codes); nil when not an enum.
	Enum map[int64]string
	// IntervalNs is the expected interval between updates in data time; the
	// reading is stale after 3 × IntervalNs. 0 when no period is known.
	IntervalNs int64
	// Src is the index of the source that feeds it (the first, if several do).
	Src int
}

// Values holds the readings of every slot and the decode counters. It is
// owned by whoever owns the state (pack.Engine, under its lock); Map.Decode
// writes into it.
type Values struct {
	V    []float64 // latest value, in the binding's unit
	Raw  []int64   // latest raw value (for enums and diagnostics)
	T    []int64   // data time of the latest update, ns; 0 = never
	Flag []Flag

	// Updated lists the slots written by the Decode calls since the owner last
	// truncated it (owner does v.Updated = v.Updated[:0]).
	Updated []int32

	// Src holds the counters per source, indexed like the profile's sources.
	Src []SourceCounters
}

// SourceCounters count what one source delivered.
type SourceCounters struct {
	Messages     uint64 // messages received (frames and lines, not gaps)
	Unknown      uint64 // frames with an ID the profile does not know, lines no pattern matches
	DecodeErrors uint64 // fields the data did not reach, malformed numbers
	ErrorFrames  uint64 // CAN error frames
	Gaps         uint64
	LastT        int64 // data time of the latest message, ns
	// IDs holds per-ID statistics for the bus view (CAN sources).
	IDs map[uint32]*IDStat
	// Patterns holds per-line-pattern counts (text sources), indexed like the
	// profile's lines; unmatched lines are counted in Unknown.
	Patterns []uint64
	// LastLine is the latest line received, for the bus view.
	LastLine string
}

// IDStat is one CAN ID seen on a source. The key in SourceCounters.IDs has
// bit 31 set for extended IDs.
type IDStat struct {
	Count  uint64
	FirstT int64
	LastT  int64
	Len    uint8
	Data   [8]byte
	Known  bool
}

// NewValues makes a zeroed Values for a compiled map.
func NewValues(m *Map) *Values {
	n := len(m.slots)
	v := &Values{
		V:    make([]float64, n),
		Raw:  make([]int64, n),
		T:    make([]int64, n),
		Flag: make([]Flag, n),
		Src:  make([]SourceCounters, m.nsrc),
	}
	for i := range v.Src {
		v.Src[i].IDs = make(map[uint32]*IDStat)
		v.Src[i].Patterns = make([]uint64, len(m.lines))
	}
	return v
}
