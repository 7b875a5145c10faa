package bus

import (
	"go.einride.tech/can"
)

// Kind says what a Message carries.
type Kind uint8

// Message kinds.
const (
	// KindCAN is a classical CAN data or remote frame in Message.Frame.
	KindCAN Kind = iota + 1
	// KindLine is one line of text from a serial console in Message.Text,
	// without its line ending.
	KindLine
	// KindGap marks a break in the data: a reconnect, a suspend, a clock
	// step. Nothing integrates across it. Message.Text gives the reason.
	KindGap
	// KindError is a CAN error frame; Message.Frame holds it as received
	// (the error class bits in Frame.ID).
	KindError
)

// String names a kind for logs and JSON.
func (k Kind) String() string {
	switch k {
	case KindCAN:
		return "can"
	case KindLine:
		return "line"
	case KindGap:
		return "gap"
	case KindError:
		return "error"
	}
	return "unknown"
}

// Message is one timestamped item from a source: a CAN frame, a console line
// or a gap marker.
//
// T is the message's data time in nanoseconds since the Unix epoch: for a live
// source the wall time at start plus the monotonic offset (see Clock), for the
// simulator simulated time, for a replay the recording's time. Src is the
// index of the source in the table the caller set up (for a single profile,
// the index of its [[source]] entry).
type Message struct {
	T     int64
	Src   uint16
	Kind  Kind
	Frame can.Frame
	Text  string
}

// State is the connection state of a source.
type State uint8

// Source states.
const (
	StateConnecting State = iota + 1
	StateConnected
	StateDisconnected
	StateStopped
)

// String names a state for logs, the page and JSON.
func (s State) String() string {
	switch s {
	case StateConnecting:
		return "connecting"
	case StateConnected:
		return "connected"
	case StateDisconnected:
		return "disconnected"
	case StateStopped:
		return "stopped"
	}
	return "unknown"
}

// Status is a change of a source's state, with the reason in plain words
// ("no such device /dev/ttyUSB0", "listen-only, error-active").
type Status struct {
	Src    uint16
	T      int64 // data time of the change, ns
	State  State
	Reason string
}

// Sink receives what sources produce. Deliver is called from the source's own
// goroutine with a batch the sink must not keep after it returns (the source
// reuses the slice). Status reports connection changes. Implementations must
// be safe for concurrent use by several sources.
type Sink interface {
	Deliver(batch []Message)
	Status(st Status)
}
