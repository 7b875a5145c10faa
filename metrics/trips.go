package metrics

import (
	"maps"

	"packwatch/pack"
)

// packTrips counts one pack's trips per limit and its sensor faults since
// the handler started.
type packTrips struct {
	maxID  uint64            // highest alarm id counted
	ByLim  map[string]uint64 // trips per limit key ("cell_low")
	Faults uint64
}

// trips counts alarms per pack. The engine gives every alarm a new id,
// rising engine-wide, and keeps it in the list at least until it is
// acknowledged and no longer active, so every alarm is in at least one
// observed snapshot unless it is created, acknowledged and cleared between
// two ticks.
type trips struct {
	byPack map[string]*packTrips
}

func newTrips() trips { return trips{byPack: make(map[string]*packTrips)} }

// count adds the alarms of s not counted before, and makes sure every limit
// the pack checks has a counter (zero until it trips), so that rate() and
// increase() work from the first trip on.
func (t *trips) count(s *pack.Snapshot) {
	for i := range s.Packs {
		p := &s.Packs[i]
		pt := t.byPack[p.ID]
		if pt == nil {
			pt = &packTrips{ByLim: make(map[string]uint64)}
			t.byPack[p.ID] = pt
		}
		for _, m := range p.Margins {
			if _, ok := pt.ByLim[m.Limit]; !ok {
				pt.ByLim[m.Limit] = 0
			}
		}
		maxID := pt.maxID
		for _, a := range p.Alarms {
			if a.ID <= pt.maxID {
				continue
			}
			switch a.Level {
			case "fault":
				pt.Faults++
			case "trip":
				pt.ByLim[a.Limit]++
			}
			maxID = max(maxID, a.ID)
		}
		pt.maxID = maxID
	}
}

// restart forgets the alarm ids seen (a new engine numbers from 1 again)
// and keeps the counts.
func (t *trips) restart() {
	for _, pt := range t.byPack {
		pt.maxID = 0
	}
}

// copy returns the counts for one scrape.
func (t *trips) copy() map[string]packTrips {
	out := make(map[string]packTrips, len(t.byPack))
	for id, pt := range t.byPack {
		out[id] = packTrips{maxID: pt.maxID, ByLim: maps.Clone(pt.ByLim), Faults: pt.Faults}
	}
	return out
}
