package pack

import (
	"cmp"
	"fmt"
	"slices"
	"strings"

	"packwatch/config"
	"packwatch/decode"
)

// silentNs: a source that has sent before but nothing for this long (data
// time) is reported as silent.
const silentNs = 5 * secondNs

func isCANSource(kind string) bool { return kind != "serial-text" }

// diagnose says in words why a source delivers nothing usable, or "" when
// it is fine. errRate is the error frames per second over the last second
// of data time; now is the data time.
func diagnose(src *config.Source, sc *decode.SourceCounters, errRate float64, now int64) string {
	can := isCANSource(src.Kind)
	listen := can && (src.Mode == "" || strings.EqualFold(src.Mode, "listen"))
	known := sc.Messages - min(sc.Unknown, sc.Messages)
	var parts []string
	switch {
	case sc.Messages == 0 && sc.ErrorFrames == 0:
		if can {
			parts = append(parts, "no messages at all: check the adapter, the wiring (CAN-H, CAN-L, ground), the bitrate and that the BMS is powered")
		} else {
			parts = append(parts, "no lines at all: check the port, the baud rate and that the console prints")
		}
	case sc.Messages > 0 && known == 0:
		if can {
			parts = append(parts, "messages but none known: IDs "+unknownIDs(sc, 5)+" are not in the profile (check the IDs and whether they are extended)")
		} else {
			line := sc.LastLine
			if len(line) > 60 {
				line = line[:60] + "…"
			}
			parts = append(parts, fmt.Sprintf("lines but none match a pattern; the last was %q", line))
		}
	case sc.LastT != 0 && now-sc.LastT > silentNs:
		parts = append(parts, fmt.Sprintf("nothing for %.0f s", float64(now-sc.LastT)/1e9))
	}
	if can && errRate > 0 {
		parts = append(parts, fmt.Sprintf("error frames rising (%.0f/s): check the bitrate, termination (120 Ω at each end of the bus) and the wiring", errRate))
	}
	if listen && known == 0 {
		parts = append(parts, `is the BMS the only other node? A bus needs one acknowledging node: set mode = "normal" on a bench`)
	}
	return strings.Join(parts, "; ")
}

// unknownIDs lists up to n unknown IDs of a source, most frequent first.
func unknownIDs(sc *decode.SourceCounters, n int) string {
	type idc struct {
		key   uint32
		count uint64
	}
	var list []idc
	for k, st := range sc.IDs {
		if !st.Known {
			list = append(list, idc{k, st.Count})
		}
	}
	slices.SortFunc(list, func(a, b idc) int {
		if c := cmp.Compare(b.count, a.count); c != 0 {
			return c
		}
		return cmp.Compare(a.key, b.key)
	})
	var names []string
	for i, e := range list {
		if i == n {
			names = append(names, fmt.Sprintf("and %d more", len(list)-n))
			break
		}
		names = append(names, idHex(e.key))
	}
	return strings.Join(names, ", ")
}

// idHex formats an ID key (bit 31 set for extended IDs): 0x4D0, 0x12ABCDEF.
func idHex(key uint32) string {
	if key&(1<<31) != 0 {
		return fmt.Sprintf("0x%08X", key&^(1<<31))
	}
	return fmt.Sprintf("0x%03X", key)
}
