//go:build linux

package bus

import (
	"context"
	"os"
)

// NewSocketCANSourceWithDial returns a socketcan source whose socket comes
// from dial instead of a CAN_RAW socket, for tests over socketpair.
func NewSocketCANSourceWithDial(spec Spec, dial func(ctx context.Context) (*os.File, error)) Source {
	spec = spec.withDefaults()
	a, _ := newSocketCANAdapter(spec)
	a.(*socketCANAdapter).dial = dial
	return newRunner(spec, a)
}
