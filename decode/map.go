package decode

import (
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
	lines []lineDec
}

type lineDec struct{}

// Slots lists every expanded binding, indexed like Values.
func (m *Map) Slots() []Slot { return m.slots }

// SlotIndex finds a slot by canonical binding name.
func (m *Map) SlotIndex(name string) (int, bool) {
	i, ok := m.index[name]
	return i, ok
}

// Profile is the profile the map was compiled from.
func (m *Map) Profile() *config.Profile { return m.prof }

// Decode applies one message to v: it updates the slots the message carries,
// appends their indexes to v.Updated and counts the message on its source.
func (m *Map) Decode(msg *bus.Message, v *Values) {}
