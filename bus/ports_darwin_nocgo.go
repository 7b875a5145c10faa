//go:build darwin && !cgo

package bus

import (
	"fmt"
	"runtime"
	"sort"

	"go.bug.st/serial"
)

// ListPorts returns the serial ports of this machine by name only: USB
// details on macOS need a build with cgo (IOKit), so usb:VID:PID names do not
// resolve in this build.
func ListPorts() ([]PortInfo, error) {
	names, err := serial.GetPortsList()
	if err != nil {
		return nil, fmt.Errorf("list serial ports: %w", err)
	}
	out := make([]PortInfo, 0, len(names))
	for _, n := range names {
		out = append(out, PortInfo{Name: n})
	}
	out = preferCallout(out, runtime.GOOS)
	sort.Slice(out, func(i, j int) bool { return out[i].Name < out[j].Name })
	return out, nil
}
