package bus

import (
	"fmt"
	"io"
	"runtime"
	"text/tabwriter"
)

// PortsReport is what `packwatch ports` prints: the serial ports with the
// name to put in a profile, and the CAN interfaces with their state.
type PortsReport struct {
	Ports []PortInfo
	CAN   []CANInterface
	// CANSupported is false where SocketCAN does not exist (not Linux).
	CANSupported bool
	// CANNote explains an empty CAN list ("this kernel has no CAN sockets").
	CANNote string
}

// ReadPortsReport lists this machine's ports and CAN interfaces.
func ReadPortsReport() (PortsReport, error) {
	ports, err := ListPorts()
	if err != nil {
		return PortsReport{}, err
	}
	cans, err := ListCANInterfaces()
	if err != nil {
		return PortsReport{}, err
	}
	r := PortsReport{Ports: ports, CAN: cans, CANSupported: runtime.GOOS == "linux"}
	if r.CANSupported && len(cans) == 0 {
		r.CANNote = canKernelNote()
	}
	return r, nil
}

// WriteTo prints the report as aligned text.
func (r PortsReport) WriteTo(w io.Writer) (int64, error) {
	cw := &countWriter{w: w}
	tw := tabwriter.NewWriter(cw, 0, 4, 2, ' ', 0)
	dash := func(s string) string {
		if s == "" {
			return "-"
		}
		return s
	}
	fmt.Fprintln(tw, "Serial ports")
	if len(r.Ports) == 0 {
		fmt.Fprintln(tw, "  none found")
	} else {
		fmt.Fprintln(tw, "  PORT\tVID:PID\tSERIAL\tPRODUCT\tDEVICE FOR THE PROFILE")
		for _, p := range r.Ports {
			vidpid := "-"
			if p.USB && p.VID != "" {
				vidpid = p.VID + ":" + p.PID
			}
			dev := p.USBName()
			if dev == "" {
				dev = p.Name
			}
			fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\t%s\n", p.Name, vidpid, dash(p.Serial), dash(p.Product), dev)
		}
	}
	if err := tw.Flush(); err != nil {
		return cw.n, err
	}
	tw = tabwriter.NewWriter(cw, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "\nCAN interfaces")
	switch {
	case !r.CANSupported:
		fmt.Fprintln(tw, "  SocketCAN exists only on Linux; use a serial-line CAN adapter (kind = \"serial-can\")")
	case len(r.CAN) == 0 && r.CANNote != "":
		fmt.Fprintln(tw, "  none: "+r.CANNote)
	case len(r.CAN) == 0:
		fmt.Fprintln(tw, "  none found")
	default:
		fmt.Fprintln(tw, "  INTERFACE\tSTATE")
		for _, c := range r.CAN {
			fmt.Fprintf(tw, "  %s\t%s\n", c.Name, c.Describe())
		}
	}
	if err := tw.Flush(); err != nil {
		return cw.n, err
	}
	if len(r.Ports) > 0 {
		fmt.Fprintln(cw, "\nA usb:VID:PID:SERIAL device finds the adapter again when the OS gives it a new name.")
	}
	return cw.n, cw.err
}

type countWriter struct {
	w   io.Writer
	n   int64
	err error
}

func (c *countWriter) Write(p []byte) (int, error) {
	if c.err != nil {
		return 0, c.err
	}
	n, err := c.w.Write(p)
	c.n += int64(n)
	c.err = err
	return n, err
}
