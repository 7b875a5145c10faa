//go:build !linux

package bus

import (
	"errors"
	"runtime"
)

func newSocketCANAdapter(Spec) (adapter, error) {
	return nil, errors.New("socketcan needs Linux, and this is " + runtime.GOOS + ": use a serial-line CAN adapter (kind = \"serial-can\") or a tcp-can gateway")
}
