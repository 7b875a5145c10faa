package bus

import (
	"strings"
	"testing"

	"go.einride.tech/can"
)

// Error class and controller bits of include/uapi/linux/can/error.h
// (CAN_ERR_ACK 0x20, CAN_ERR_BUSOFF 0x40, CAN_ERR_CRTL 0x04 with data[1]
// CAN_ERR_CRTL_RX_PASSIVE 0x10, CAN_ERR_CRTL_RX_OVERFLOW 0x01; the same
// values as go.einride.tech/can/pkg/socketcan's ErrorClass).
func TestDescribeErrorFrame(t *testing.T) {
	for _, tc := range []struct {
		f    can.Frame
		want []string
	}{
		{can.Frame{ID: 0x20}, []string{"no acknowledgement"}},
		{can.Frame{ID: 0x40}, []string{"bus-off"}},
		{can.Frame{ID: 0x04, Length: 8, Data: can.Data{0, 0x10}}, []string{"error-passive"}},
		{can.Frame{ID: 0x04, Length: 8, Data: can.Data{0, 0x04}}, []string{"error-warning"}},
		{can.Frame{ID: 0x04, Length: 8, Data: can.Data{0, 0x01}}, []string{"overflow"}},
		{can.Frame{ID: 0x88}, []string{"protocol violation", "bus error"}},
		{can.Frame{ID: 0}, []string{"error frame"}},
	} {
		got := DescribeErrorFrame(tc.f)
		for _, w := range tc.want {
			if !strings.Contains(got, w) {
				t.Errorf("DescribeErrorFrame(%#x %x) = %q, want %q", tc.f.ID, tc.f.Data, got, w)
			}
		}
	}
}
