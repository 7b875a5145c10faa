package main

import (
	"fmt"
	"math"

	"packwatch/pack"
	"packwatch/record"
)

// alarmLog turns changes between snapshots into recording events: a new
// trip or sensor fault, an acknowledgement, and a margin entering its
// warning band. Alarms stay in the list until acknowledged, so a snapshot
// per tick misses none of them; a warning shorter than a tick may pass
// unrecorded (the raw messages still hold it).
type alarmLog struct {
	rec    *record.Writer
	alarms map[string]map[uint64]bool // pack → alarm id → acked
	warns  map[string]string          // pack|limit|subject → margin state
}

func newAlarmLog(rec *record.Writer) *alarmLog {
	return &alarmLog{rec: rec, alarms: map[string]map[uint64]bool{}, warns: map[string]string{}}
}

// observe records what changed since the previous snapshot.
func (l *alarmLog) observe(s *pack.Snapshot) {
	if l == nil || l.rec == nil || s == nil {
		return
	}
	t := int64(math.Round(float64(s.DataT) * 1e9))
	for _, p := range s.Packs {
		seen := l.alarms[p.ID]
		if seen == nil {
			seen = map[uint64]bool{}
			l.alarms[p.ID] = seen
		}
		for _, a := range p.Alarms {
			what := a.Label
			if a.Subject != "" {
				what += " (" + a.Subject + ")"
			}
			acked, known := seen[a.ID]
			if !known {
				kind := record.EventTrip
				if a.Level == "warn" {
					kind = record.EventWarn
				}
				text := fmt.Sprintf("%s: %s %s", p.ID, a.Level, what)
				if a.Value != nil {
					text += fmt.Sprintf(" at %g", float64(*a.Value))
				}
				l.rec.Event(record.Event{T: int64(math.Round(float64(a.Since) * 1e9)), Kind: kind, Source: record.NoSource, Text: text})
			}
			if a.Acked && !acked {
				l.rec.Event(record.Event{T: t, Kind: record.EventAck, Source: record.NoSource, Text: fmt.Sprintf("%s: acknowledged %s %s", p.ID, a.Level, what)})
			}
			seen[a.ID] = a.Acked
		}
		for _, m := range p.Margins {
			key := p.ID + "|" + m.Limit + "|" + m.Subject
			if m.State == "warn" && l.warns[key] != "warn" && l.warns[key] != "trip" {
				text := fmt.Sprintf("%s: warning, %s", p.ID, m.Label)
				if m.Subject != "" {
					text += " (" + m.Subject + ")"
				}
				if m.Margin != nil {
					text += fmt.Sprintf(", margin %.3g %s", float64(*m.Margin), m.Unit)
				}
				l.rec.Event(record.Event{T: t, Kind: record.EventWarn, Source: record.NoSource, Text: text})
			}
			l.warns[key] = m.State
		}
	}
}
