//go:build !darwin || cgo

package bus

import (
	"fmt"
	"runtime"
	"sort"
	"strings"

	"go.bug.st/serial/enumerator"
)

// ListPorts returns the serial ports of this machine, sorted by name.
func ListPorts() ([]PortInfo, error) {
	list, err := enumerator.GetDetailedPortsList()
	if err != nil {
		return nil, fmt.Errorf("list serial ports: %w", err)
	}
	out := make([]PortInfo, 0, len(list))
	for _, p := range list {
		if p == nil || p.Name == "" {
			continue
		}
		out = append(out, PortInfo{Name: p.Name, USB: p.IsUSB, VID: strings.ToUpper(p.VID), PID: strings.ToUpper(p.PID),
			Serial: p.SerialNumber, Product: p.Product, Manufacturer: p.Manufacturer})
	}
	out = preferCallout(out, runtime.GOOS)
	sort.Slice(out, func(i, j int) bool { return out[i].Name < out[j].Name })
	return out, nil
}
