package sim

import (
	"fmt"
	"strconv"
	"strings"
	"time"
)

// FaultKind names a fault the simulator can put into its data.
type FaultKind string

// Faults. Those that shape the pack (weak-cell, low-soc) act from the start;
// the others from their After time.
const (
	// FaultCellHigh: cell N's reading drifts upward by 10 mV per simulated
	// minute (up to +0.6 V), as a failing measurement channel would.
	FaultCellHigh FaultKind = "cell-high"
	// FaultWeakCell: cell N has 80 % of the capacity and twice the R0 of the
	// others, balanced at the top (so it stands lower at any lower charge).
	FaultWeakCell FaultKind = "weak-cell"
	// FaultSensorStop: temperature sensor N stops: its field sends the
	// profile's first `invalid` raw value, or without one keeps its last value.
	FaultSensorStop FaultKind = "sensor-stop"
	// FaultHotSensor: sensor N (default: the first busbar sensor, else 1)
	// runs hot, 5 °C past temp_high_c (60 °C without that limit); from the
	// start if After is 0, else it heats up with a two-minute time constant.
	FaultHotSensor FaultKind = "hot-sensor"
	// FaultSilent: source NAME (default: the first) sends nothing more.
	FaultSilent FaultKind = "silent"
	// FaultContactorStuck: the contactor feedback keeps the state it had when
	// the fault began, whatever the contactor does.
	FaultContactorStuck FaultKind = "contactor-stuck"
	// FaultGarbage: each source also sends malformed data: CAN frames with
	// unknown IDs and short frames, console lines of junk.
	FaultGarbage FaultKind = "garbage"
	// FaultFlag: every fault.* binding reads 1 and bms.state reads its
	// "fault" code, if the profile has them.
	FaultFlag FaultKind = "fault-flag"
	// FaultLowSOC: the pack starts at 8 % state of charge.
	FaultLowSOC FaultKind = "low-soc"
)

const (
	cellDriftVPerS = 0.010 / 60
	cellDriftMaxV  = 0.6
	weakCapacity   = 0.80
	weakR0         = 2.0
	lowSOCStart    = 0.08
)

// FaultKinds lists every fault kind, for help texts.
func FaultKinds() []FaultKind {
	return []FaultKind{FaultCellHigh, FaultWeakCell, FaultSensorStop, FaultHotSensor, FaultSilent,
		FaultContactorStuck, FaultGarbage, FaultFlag, FaultLowSOC}
}

// Fault is one fault on request.
type Fault struct {
	Kind FaultKind
	// N is the cell or sensor number (from 1) for the kinds that take one;
	// 0 takes the kind's default.
	N int
	// Source names the source for FaultSilent ("" = the first).
	Source string
	// After is the simulated time from the start when the fault begins.
	After time.Duration
}

// String writes the fault in the form ParseFault reads.
func (f Fault) String() string {
	s := string(f.Kind)
	switch {
	case f.Source != "":
		s += ":" + f.Source
	case f.N > 0:
		s += ":" + strconv.Itoa(f.N)
	}
	if f.After > 0 {
		s += "@" + f.After.String()
	}
	return s
}

// ParseFault reads KIND[:N|:SOURCE][@AFTER], e.g. "weak-cell:7",
// "sensor-stop:2@5m", "silent:console@90s", "fault-flag".
func ParseFault(s string) (Fault, error) {
	var f Fault
	rest := s
	if k, at, ok := strings.Cut(rest, "@"); ok {
		d, err := time.ParseDuration(at)
		if err != nil || d < 0 {
			return f, fmt.Errorf("fault %q: time after @ must be a duration such as 90s or 5m", s)
		}
		f.After, rest = d, k
	}
	kind, arg, hasArg := strings.Cut(rest, ":")
	f.Kind = FaultKind(kind)
	known := false
	for _, k := range FaultKinds() {
		known = known || k == f.Kind
	}
	if !known {
		names := make([]string, 0, 9)
		for _, k := range FaultKinds() {
			names = append(names, string(k))
		}
		return f, fmt.Errorf("fault %q: unknown kind %q (known: %s)", s, kind, strings.Join(names, ", "))
	}
	if !hasArg {
		return f, nil
	}
	switch f.Kind {
	case FaultCellHigh, FaultWeakCell, FaultSensorStop, FaultHotSensor:
		n, err := strconv.Atoi(arg)
		if err != nil || n < 1 {
			return f, fmt.Errorf("fault %q: %q is not a number from 1", s, arg)
		}
		f.N = n
	case FaultSilent:
		if arg == "" {
			return f, fmt.Errorf("fault %q: empty source name", s)
		}
		f.Source = arg
	default:
		return f, fmt.Errorf("fault %q: %s takes no argument", s, f.Kind)
	}
	return f, nil
}
