package bus

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"time"

	"go.bug.st/serial"
)

// serialMode checks and converts the line settings of spec.
func serialMode(spec Spec) (*serial.Mode, error) {
	return SerialMode(spec.Baud, spec.DataBits, spec.Parity, spec.StopBits)
}

// SerialMode checks and converts serial line settings as a profile writes
// them (parity none, even, odd, mark or space; stop bits "1", "1.5" or "2";
// "" for the defaults N and 1) for go.bug.st/serial. A data-bits value of 0
// means 8.
func SerialMode(baud, dataBits int, parity, stopBits string) (*serial.Mode, error) {
	if dataBits == 0 {
		dataBits = 8
	}
	spec := Spec{Baud: baud, DataBits: dataBits, Parity: parity, StopBits: stopBits}
	m := &serial.Mode{BaudRate: spec.Baud, DataBits: spec.DataBits}
	if spec.Baud <= 0 {
		return nil, fmt.Errorf("baud %d", spec.Baud)
	}
	if spec.DataBits < 5 || spec.DataBits > 8 {
		return nil, fmt.Errorf("data bits %d: want 5 to 8", spec.DataBits)
	}
	switch strings.ToLower(spec.Parity) {
	case "", "none", "n":
		m.Parity = serial.NoParity
	case "even", "e":
		m.Parity = serial.EvenParity
	case "odd", "o":
		m.Parity = serial.OddParity
	case "mark", "m":
		m.Parity = serial.MarkParity
	case "space", "s":
		m.Parity = serial.SpaceParity
	default:
		return nil, fmt.Errorf("parity %q: want none, even, odd, mark or space", spec.Parity)
	}
	switch spec.StopBits {
	case "", "1":
		m.StopBits = serial.OneStopBit
	case "1.5":
		m.StopBits = serial.OnePointFiveStopBits
	case "2":
		m.StopBits = serial.TwoStopBits
	default:
		return nil, fmt.Errorf("stop bits %q: want 1, 1.5 or 2", spec.StopBits)
	}
	return m, nil
}

// serialDialer opens a serial port by path or by USB identity. For a plain
// path it remembers the USB identity of the device it found there, so that
// when the device comes back under another name (ttyUSB0 as ttyUSB1, COM5
// as COM7) it is found again.
type serialDialer struct {
	spec Spec
	mode *serial.Mode
	id   *USBID // from a usb: name, or learnt at the first open of a path
	path string // the path opened last
}

func newSerialDialer(spec Spec) *serialDialer {
	m, _ := serialMode(spec) // checked by Open
	d := &serialDialer{spec: spec, mode: m}
	if IsUSBName(spec.Device) {
		id, _ := ParseUSBName(spec.Device) // checked by Open
		d.id = &id
	}
	return d
}

// resolve returns the path to open and a label for statuses.
func (d *serialDialer) resolve() (string, error) {
	dev := d.spec.Device
	if IsUSBName(dev) {
		ports, err := d.spec.Ports()
		if err != nil {
			return "", err
		}
		return FindPort(*d.id, ports)
	}
	if _, err := os.Stat(dev); err != nil && d.id != nil {
		// Gone from its path: look for the same device under a new name.
		if ports, perr := d.spec.Ports(); perr == nil {
			if p, ferr := FindPort(*d.id, ports); ferr == nil {
				return p, nil
			}
		}
	}
	return dev, nil
}

// learn remembers the USB identity of the device at a plain path.
func (d *serialDialer) learn(path string) {
	if d.id != nil {
		return
	}
	ports, err := d.spec.Ports()
	if err != nil {
		return
	}
	real, _ := filepath.EvalSymlinks(path)
	for _, p := range ports {
		if (p.Name == path || p.Name == real) && p.USB && p.VID != "" {
			id := USBID{VID: p.VID, PID: p.PID, Serial: p.Serial}
			if id.Serial != "" { // without a serial number, two sticks look alike
				d.id = &id
			}
			return
		}
	}
}

// open resolves and opens the port, with reads returning (0, nil) after idle.
func (d *serialDialer) open(ctx context.Context, idle time.Duration) (serial.Port, string, error) {
	path, err := d.resolve()
	if err != nil {
		return nil, "", fmt.Errorf("open %s: %w", d.spec.Device, err)
	}
	p, err := serial.Open(path, d.mode)
	if err != nil {
		return nil, "", fmt.Errorf("open %s: %w", path, describeSerialErr(err))
	}
	if err := p.SetReadTimeout(idle); err != nil {
		p.Close()
		return nil, "", fmt.Errorf("open %s: set read timeout: %w", path, err)
	}
	d.path = path
	if !IsUSBName(d.spec.Device) {
		d.learn(path)
	}
	label := path
	if path != d.spec.Device {
		label = fmt.Sprintf("%s (%s)", path, d.spec.Device)
	}
	return p, fmt.Sprintf("%s, %d baud %d%s%s", label, d.spec.Baud, d.spec.DataBits, parityLetter(d.spec.Parity), stopBitsOr1(d.spec.StopBits)), nil
}

func parityLetter(p string) string {
	if p == "" {
		return "N"
	}
	return strings.ToUpper(p[:1])
}

func stopBitsOr1(s string) string {
	if s == "" {
		return "1"
	}
	return s
}

// describeSerialErr adds advice to the errors a user can fix.
func describeSerialErr(err error) error {
	var pe *serial.PortError
	if errors.As(err, &pe) {
		switch pe.Code() {
		case serial.PortBusy:
			return fmt.Errorf("%w (another program has it open)", err)
		case serial.PermissionDenied:
			return fmt.Errorf("%w (on Linux add yourself to the group that owns the port, often dialout)", err)
		}
	}
	return err
}

// serialLink adapts a serial.Port to link: the port already returns (0, nil)
// on its read timeout. While the port is quiet it checks every few seconds
// that the device still exists, since some drivers (notably on Windows) keep
// timing out instead of failing after an unplug.
type serialLink struct {
	serial.Port
	path      string
	lastCheck time.Time
}

// presenceEvery is how often a quiet port is checked for presence.
const presenceEvery = 2 * time.Second

func (l *serialLink) Read(p []byte) (int, error) {
	n, err := l.Port.Read(p)
	if err != nil {
		return n, fmt.Errorf("read: %w", err)
	}
	if n == 0 && time.Since(l.lastCheck) >= presenceEvery {
		l.lastCheck = time.Now()
		if !portPresent(l.path) {
			return 0, fmt.Errorf("read: %s is gone", l.path)
		}
	}
	return n, nil
}

// portPresent reports whether a serial port still exists: its device node on
// Unix, its name in the port list on Windows.
func portPresent(path string) bool {
	if runtime.GOOS != "windows" {
		_, err := os.Stat(path)
		return err == nil
	}
	names, err := serial.GetPortsList()
	if err != nil {
		return true // cannot tell: keep reading
	}
	for _, n := range names {
		if strings.EqualFold(n, path) {
			return true
		}
	}
	return false
}
