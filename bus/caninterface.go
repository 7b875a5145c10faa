package bus

import (
	"fmt"
	"strings"
)

// CANInterface describes a SocketCAN network interface as the OS reports it.
// Fields the OS does not give are empty.
type CANInterface struct {
	Name      string
	Type      string // "can", "vcan", "vxcan", ...
	OperState string // from /sys/class/net/NAME/operstate: "up", "down", ...
	State     string // "error-active", "error-warning", "error-passive", "bus-off", "stopped", "sleeping"
	Mode      string // "listen-only" or "normal"
	Bitrate   int    // bit/s
	Err       string // why the CAN details could not be read
}

// Describe says in words how the interface is set up:
// "up, listen-only, error-active, 500 kbit/s".
func (c CANInterface) Describe() string {
	var parts []string
	if c.OperState != "" {
		parts = append(parts, c.OperState)
	}
	if c.Type != "" && c.Type != "can" {
		parts = append(parts, c.Type)
	}
	if c.Mode != "" {
		parts = append(parts, c.Mode)
	}
	if c.State != "" {
		parts = append(parts, c.State)
	}
	if c.Bitrate > 0 {
		parts = append(parts, fmt.Sprintf("%d kbit/s", c.Bitrate/1000))
	}
	if c.Err != "" {
		parts = append(parts, "details not readable: "+c.Err)
	}
	if len(parts) == 0 {
		return "no details"
	}
	return strings.Join(parts, ", ")
}

// canStateName names the kernel's enum can_state (include/uapi/linux/can/netlink.h).
func canStateName(s uint32) string {
	switch s {
	case 0:
		return "error-active"
	case 1:
		return "error-warning"
	case 2:
		return "error-passive"
	case 3:
		return "bus-off"
	case 4:
		return "stopped"
	case 5:
		return "sleeping"
	}
	return fmt.Sprintf("state %d", s)
}
