package main

import (
	"flag"
	"fmt"
	"io"

	"packwatch/bus"
)

// runPorts prints the serial ports (with VID:PID, serial number, product and
// the usb:VID:PID:SERIAL name to put in a profile) and, on Linux, the CAN
// network interfaces with their state, mode and bitrate.
func runPorts(args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("ports", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: packwatch ports\n\nLists serial ports and CAN interfaces, with the device name to put in a profile.")
	}
	if err := fs.Parse(args); err != nil {
		return 2
	}
	if fs.NArg() > 0 {
		fs.Usage()
		return 2
	}
	r, err := bus.ReadPortsReport()
	if err != nil {
		fmt.Fprintln(stderr, "packwatch ports:", err)
		return 2
	}
	if _, err := r.WriteTo(stdout); err != nil {
		fmt.Fprintln(stderr, "packwatch ports:", err)
		return 2
	}
	return 0
}
