package bus

import (
	"errors"
	"fmt"
	"strings"
)

// PortInfo describes one serial port the OS offers.
type PortInfo struct {
	Name         string // /dev/ttyUSB0, COM5, /dev/cu.usbserial-A10K7
	USB          bool
	VID, PID     string // upper-case hex, when USB
	Serial       string // the USB serial number, when the device has one
	Product      string
	Manufacturer string
}

// USBName returns the name to put in a profile so that the port is found
// again when the OS gives it another name: "usb:VID:PID:SERIAL", or
// "usb:VID:PID" when the device has no serial number. It is "" for a port
// that is not USB.
func (p PortInfo) USBName() string {
	if !p.USB || p.VID == "" || p.PID == "" {
		return ""
	}
	id := USBID{VID: p.VID, PID: p.PID, Serial: p.Serial}
	return id.String()
}

// USBID names a USB serial device by vendor, product and (optionally)
// serial number.
type USBID struct {
	VID, PID, Serial string
}

// String returns the profile form "usb:VID:PID[:SERIAL]".
func (u USBID) String() string {
	s := "usb:" + strings.ToUpper(u.VID) + ":" + strings.ToUpper(u.PID)
	if u.Serial != "" {
		s += ":" + u.Serial
	}
	return s
}

// Matches reports whether p is this device.
func (u USBID) Matches(p PortInfo) bool {
	return p.USB && strings.EqualFold(p.VID, u.VID) && strings.EqualFold(p.PID, u.PID) &&
		(u.Serial == "" || p.Serial == u.Serial)
}

// ErrUSBName is wrapped by ParseUSBName errors.
var ErrUSBName = errors.New("bad usb device name")

// IsUSBName reports whether a device string is a usb:... name.
func IsUSBName(device string) bool { return strings.HasPrefix(strings.ToLower(device), "usb:") }

// ParseUSBName parses "usb:VID:PID[:SERIAL]", VID and PID four hex digits.
func ParseUSBName(device string) (USBID, error) {
	if !IsUSBName(device) {
		return USBID{}, fmt.Errorf("%q does not start with usb: %w", device, ErrUSBName)
	}
	parts := strings.SplitN(device[4:], ":", 3)
	if len(parts) < 2 {
		return USBID{}, fmt.Errorf("%q: want usb:VID:PID or usb:VID:PID:SERIAL: %w", device, ErrUSBName)
	}
	for _, h := range parts[:2] {
		if len(h) != 4 || strings.Trim(strings.ToLower(h), "0123456789abcdef") != "" {
			return USBID{}, fmt.Errorf("%q: %q is not 4 hex digits: %w", device, h, ErrUSBName)
		}
	}
	id := USBID{VID: strings.ToUpper(parts[0]), PID: strings.ToUpper(parts[1])}
	if len(parts) == 3 {
		if parts[2] == "" {
			return USBID{}, fmt.Errorf("%q: empty serial number: %w", device, ErrUSBName)
		}
		id.Serial = parts[2]
	}
	return id, nil
}

func checkUSBName(device string) error {
	if IsUSBName(device) {
		_, err := ParseUSBName(device)
		return err
	}
	return nil
}

// FindPort returns the name of the one port in ports that id matches.
func FindPort(id USBID, ports []PortInfo) (string, error) {
	var names []string
	for _, p := range ports {
		if id.Matches(p) {
			names = append(names, p.Name)
		}
	}
	switch len(names) {
	case 0:
		return "", fmt.Errorf("no serial port is %s (unplugged? packwatch ports lists what is there)", id)
	case 1:
		return names[0], nil
	}
	return "", fmt.Errorf("%d ports are %s (%s): add the serial number to tell them apart", len(names), id, strings.Join(names, ", "))
}

// preferCallout drops macOS dial-in devices (/dev/tty.X) that have a
// call-out twin (/dev/cu.X) in the list: opening the tty. device waits for
// the carrier-detect line, so the cu. one is the one to use (common
// practice, no source).
func preferCallout(ports []PortInfo, goos string) []PortInfo {
	if goos != "darwin" {
		return ports
	}
	have := map[string]bool{}
	for _, p := range ports {
		have[p.Name] = true
	}
	out := ports[:0:0]
	for _, p := range ports {
		if rest, ok := strings.CutPrefix(p.Name, "/dev/tty."); ok && have["/dev/cu."+rest] {
			continue
		}
		out = append(out, p)
	}
	return out
}
