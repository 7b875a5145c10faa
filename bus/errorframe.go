package bus

import (
	"strings"

	"go.einride.tech/can"
)

// Error classes of a SocketCAN error frame, in the ID (CAN_ERR_MASK), and
// controller status bits in data byte 1, from Linux
// include/uapi/linux/can/error.h.
const (
	canErrTxTimeout  = 0x001
	canErrLostArb    = 0x002
	canErrCrtl       = 0x004
	canErrProt       = 0x008
	canErrTrx        = 0x010
	canErrAck        = 0x020
	canErrBusOff     = 0x040
	canErrBusError   = 0x080
	canErrRestarted  = 0x100
	canErrCrtlRxOver = 0x01
	canErrCrtlTxOver = 0x02
	canErrCrtlRxWarn = 0x04
	canErrCrtlTxWarn = 0x08
	canErrCrtlRxPass = 0x10
	canErrCrtlTxPass = 0x20
)

// DescribeErrorFrame says in words what a CAN error frame (a KindError
// message's Frame) reports: "no acknowledgement (is another node on the
// bus?), error-passive".
func DescribeErrorFrame(f can.Frame) string {
	var parts []string
	add := func(s string) { parts = append(parts, s) }
	id := f.ID
	if id&canErrTxTimeout != 0 {
		add("transmit timeout")
	}
	if id&canErrLostArb != 0 {
		add("lost arbitration")
	}
	if id&canErrCrtl != 0 {
		c := f.Data[1]
		switch {
		case c&(canErrCrtlRxPass|canErrCrtlTxPass) != 0:
			add("error-passive")
		case c&(canErrCrtlRxWarn|canErrCrtlTxWarn) != 0:
			add("error-warning")
		}
		if c&(canErrCrtlRxOver|canErrCrtlTxOver) != 0 {
			add("controller buffer overflow: frames lost")
		}
		if c&^(canErrCrtlRxOver|canErrCrtlTxOver|canErrCrtlRxWarn|canErrCrtlTxWarn|canErrCrtlRxPass|canErrCrtlTxPass) != 0 || c == 0 {
			add("controller problem")
		}
	}
	if id&canErrProt != 0 {
		add("protocol violation (wrong bitrate? missing termination?)")
	}
	if id&canErrTrx != 0 {
		add("transceiver fault (wiring)")
	}
	if id&canErrAck != 0 {
		add("no acknowledgement (is another node on the bus, or is it listen-only?)")
	}
	if id&canErrBusOff != 0 {
		add("bus-off")
	}
	if id&canErrBusError != 0 {
		add("bus error")
	}
	if id&canErrRestarted != 0 {
		add("controller restarted")
	}
	if len(parts) == 0 {
		return "error frame"
	}
	return strings.Join(parts, ", ")
}
