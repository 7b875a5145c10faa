//go:build linux

package bus

import (
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"go.einride.tech/can/pkg/candevice"
	"golang.org/x/sys/unix"
)

// sysClassNet is where Linux lists network interfaces.
const sysClassNet = "/sys/class/net"

// ListCANInterfaces returns the CAN network interfaces (ARPHRD_CAN) with
// their mode, state and bitrate where the kernel gives them.
func ListCANInterfaces() ([]CANInterface, error) {
	ents, err := os.ReadDir(sysClassNet)
	if err != nil {
		return nil, fmt.Errorf("list network interfaces: %w", err)
	}
	var out []CANInterface
	for _, e := range ents {
		if readSys(e.Name(), "type") != fmt.Sprint(unix.ARPHRD_CAN) {
			continue
		}
		ci, _ := readCANInterface(e.Name())
		out = append(out, ci)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Name < out[j].Name })
	return out, nil
}

func readSys(iface, file string) string {
	b, err := os.ReadFile(filepath.Join(sysClassNet, iface, file))
	if err != nil {
		return ""
	}
	return strings.TrimSpace(string(b))
}

// readCANInterface reads one interface; on a netlink failure it returns what
// sysfs gave with Err set, and the error.
func readCANInterface(name string) (CANInterface, error) {
	ci := CANInterface{Name: name, OperState: readSys(name, "operstate")}
	d, err := candevice.New(name)
	if err != nil {
		ci.Err = err.Error()
		return ci, err
	}
	info, err := d.Info()
	if err != nil {
		ci.Err = err.Error()
		return ci, err
	}
	ci.Type = info.Type
	if info.Type == "" || info.Type == "can" {
		ci.State = canStateName(info.State)
		ci.Bitrate = int(info.BitTiming.Bitrate)
		if info.CtrlMode.Flags&unix.CAN_CTRLMODE_LISTENONLY != 0 {
			ci.Mode = "listen-only"
		} else {
			ci.Mode = "normal"
		}
	}
	return ci, nil
}

// canKernelNote says why no CAN interface can exist, or "" when the kernel
// has CAN sockets.
func canKernelNote() string {
	fd, err := unix.Socket(unix.AF_CAN, unix.SOCK_RAW|unix.SOCK_CLOEXEC, unix.CAN_RAW)
	if err != nil {
		return "this kernel has no CAN sockets (" + err.Error() + "); modprobe can_raw, or use a serial-line CAN adapter"
	}
	unix.Close(fd)
	return ""
}
