package bus

import (
	"bytes"
	"flag"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite golden files")

func TestPortsReportGolden(t *testing.T) {
	for name, r := range map[string]PortsReport{
		"ports_linux": {
			Ports: []PortInfo{
				{Name: "/dev/ttyS0"},
				{Name: "/dev/ttyUSB0", USB: true, VID: "ABCD", PID: "1234", Serial: "BENCH1", Product: "bench CAN adapter"},
				{Name: "/dev/ttyUSB1", USB: true, VID: "ABCD", PID: "5678", Product: "console cable"},
			},
			CAN: []CANInterface{
				{Name: "can0", Type: "can", OperState: "up", State: "error-active", Mode: "listen-only", Bitrate: 500000},
				{Name: "vcan0", Type: "vcan", OperState: "unknown"},
			},
			CANSupported: true,
		},
		"ports_other":  {CANSupported: false},
		"ports_no_can": {CANSupported: true, CANNote: "this kernel has no CAN sockets (address family not supported by protocol); modprobe can_raw, or use a serial-line CAN adapter"},
	} {
		var b bytes.Buffer
		if _, err := r.WriteTo(&b); err != nil {
			t.Fatal(err)
		}
		golden := filepath.Join("testdata", name+".golden")
		if *update {
			if err := os.WriteFile(golden, b.Bytes(), 0o644); err != nil {
				t.Fatal(err)
			}
		}
		want, err := os.ReadFile(golden)
		if err != nil {
			t.Fatalf("%v (run go test -update)", err)
		}
		if !bytes.Equal(b.Bytes(), want) {
			t.Errorf("%s:\n%s\nwant:\n%s", name, b.Bytes(), want)
		}
	}
}

func TestUSBNames(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want USBID
		err  bool
	}{
		{"usb:abcd:1234:BENCH1", USBID{"ABCD", "1234", "BENCH1"}, false},
		{"USB:ABCD:1234", USBID{"ABCD", "1234", ""}, false},
		{"usb:ABCD:1234:A:B", USBID{"ABCD", "1234", "A:B"}, false},
		{"usb:ABCD", USBID{}, true},
		{"usb:ABC:1234", USBID{}, true},
		{"usb:ABCD:12G4", USBID{}, true},
		{"usb:ABCD:1234:", USBID{}, true},
		{"/dev/ttyUSB0", USBID{}, true},
	} {
		got, err := ParseUSBName(tc.in)
		if (err != nil) != tc.err || got != tc.want {
			t.Errorf("ParseUSBName(%q) = %+v, %v", tc.in, got, err)
		}
	}
	ports := []PortInfo{
		{Name: "/dev/ttyUSB0", USB: true, VID: "ABCD", PID: "1234", Serial: "A"},
		{Name: "/dev/ttyUSB1", USB: true, VID: "ABCD", PID: "1234", Serial: "B"},
		{Name: "/dev/ttyS0"},
	}
	if p, err := FindPort(USBID{"abcd", "1234", "B"}, ports); err != nil || p != "/dev/ttyUSB1" {
		t.Errorf("FindPort B = %q, %v", p, err)
	}
	if _, err := FindPort(USBID{"ABCD", "1234", ""}, ports); err == nil {
		t.Error("two matches without a serial number accepted")
	}
	if _, err := FindPort(USBID{"ABCD", "9999", ""}, ports); err == nil {
		t.Error("no match accepted")
	}
	if got := ports[0].USBName(); got != "usb:ABCD:1234:A" {
		t.Errorf("USBName = %q", got)
	}
}

// The real listing runs on this machine without error (its content depends
// on the hardware, so only its shape is checked).
func TestReadPortsReport(t *testing.T) {
	r, err := ReadPortsReport()
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range r.Ports {
		if p.Name == "" {
			t.Errorf("port without a name: %+v", p)
		}
	}
	for _, c := range r.CAN {
		if c.Name == "" {
			t.Errorf("CAN interface without a name: %+v", c)
		}
	}
}

func TestPreferCallout(t *testing.T) {
	in := []PortInfo{{Name: "/dev/cu.usbserial-X1"}, {Name: "/dev/tty.usbserial-X1"}, {Name: "/dev/tty.Bluetooth"}, {Name: "/dev/cu.Bluetooth"}, {Name: "/dev/tty.only"}}
	got := preferCallout(append([]PortInfo(nil), in...), "darwin")
	var names []string
	for _, p := range got {
		names = append(names, p.Name)
	}
	if want := "/dev/cu.usbserial-X1 /dev/cu.Bluetooth /dev/tty.only"; strings.Join(names, " ") != want {
		t.Errorf("darwin: %v, want %s", names, want)
	}
	if got := preferCallout(append([]PortInfo(nil), in...), "linux"); len(got) != len(in) {
		t.Errorf("linux: %d ports, want %d", len(got), len(in))
	}
}
