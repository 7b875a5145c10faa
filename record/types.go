package record

import "time"

// Meta describes a recording session.
type Meta struct {
	Tool     string // program that wrote the file, "packwatch"
	Version  string // its version
	Host     string // host name of the machine that recorded
	Operator string // who ran the session (free text)
	Notes    string // operator notes
	// Start is when the session started; stored in UTC.
	Start time.Time
	// Mode is "live", "simulated" or "import".
	Mode    string
	Sources []SourceInfo
}

// SourceInfo describes one source; Index is the bus.Message.Src of its messages.
type SourceInfo struct {
	Index  uint16
	Name   string // the profile's name for it
	Kind   string // socketcan, serial-can, serial-text, tcp-can, sim, ...
	Device string // device path or address
}

// Event kinds. Writers may use others; readers keep whatever kind is stored.
const (
	EventConnect    = "connect"
	EventDisconnect = "disconnect"
	EventGap        = "gap"
	EventSuspend    = "suspend"
	EventClockStep  = "clock_step"
	EventWarn       = "warn"
	EventTrip       = "trip"
	EventAck        = "ack"
	EventCheck      = "check"
	EventNote       = "note"
	EventOverrun    = "overrun"
	EventRecovery   = "recovery"
)

// NoSource is Event.Source for an event that belongs to no source.
const NoSource = -1

// Event is something that happened during the session, at data time T (ns
// since the Unix epoch).
type Event struct {
	T      int64
	Kind   string
	Source int    // source index, or NoSource
	Text   string // human-readable
	JSON   string // optional detail as a JSON document, "" for none
}

// ProfileVersion is one profile version used in the session, taking effect at
// data time T (ns).
type ProfileVersion struct {
	T    int64
	Name string
	Hash string // hex SHA-256 of Text, as the caller computed it
	Text string // the profile's TOML
}

// StatRow is the decimated value of one binding over one second of data time.
type StatRow struct {
	Bind           string
	Min, Max, Last float64
}

// StatPoint is a StatRow read back: Sec is the second (Unix seconds of data time).
type StatPoint struct {
	Sec            int64
	Min, Max, Last float64
}
