package pack

import (
	"math"
	"testing"
)

// Check values from Davis, Burns, Bril, Lukkien, "Controller Area Network (CAN)
// schedulability analysis: Refuted, revisited and revised", Real-Time Systems
// 2007, and Linux include/linux/can/length.h (same totals), as listed in
// REFERENCES.md.
func TestFrameBits(t *testing.T) {
	tests := []struct {
		n         int
		ext, wc   bool
		wantBits  int
		reference string
	}{
		{8, false, false, 111, "8 bytes, 11-bit ID, unstuffed (Davis 2007; length.h)"},
		{8, false, true, 135, "8 bytes, 11-bit ID, worst case (Davis 2007; length.h)"},
		{8, true, false, 131, "8 bytes, 29-bit ID, unstuffed (Davis 2007; length.h)"},
		{8, true, true, 160, "8 bytes, 29-bit ID, worst case (Davis 2007; length.h)"},
		{0, false, false, 47, "0 bytes, 11-bit ID, unstuffed (Davis 2007; length.h)"},
		{0, false, true, 55, "0 bytes, 11-bit ID, worst case (Davis 2007; length.h)"},
		{0, true, false, 67, "0 bytes, 29-bit ID, unstuffed (Davis 2007; length.h)"},
		{0, true, true, 80, "0 bytes, 29-bit ID, worst case (Davis 2007; length.h)"},
		{12, false, true, 135, "more than 8 bytes counts as 8 (classical CAN)"},
	}
	for _, tc := range tests {
		if got := FrameBits(tc.n, tc.ext, tc.wc); got != tc.wantBits {
			t.Errorf("%s: FrameBits(%d, %v, %v) = %d, want %d", tc.reference, tc.n, tc.ext, tc.wc, got, tc.wantBits)
		}
	}
}

// Frames per second and bus load, REFERENCES.md ("CAN frame length and bus
// limits", derived from the same formula).
func TestBusLoad(t *testing.T) {
	fps := []struct {
		bitrate int
		ext, wc bool
		want    int
	}{
		{1_000_000, false, false, 9009},
		{1_000_000, false, true, 7407},
		{1_000_000, true, true, 6250},
		{500_000, false, true, 3703},
		{250_000, true, true, 1562},
	}
	for _, tc := range fps {
		if got := tc.bitrate / FrameBits(8, tc.ext, tc.wc); got != tc.want {
			t.Errorf("frames/s at %d bit/s ext=%v worst=%v: %d, want %d", tc.bitrate, tc.ext, tc.wc, got, tc.want)
		}
	}
	loads := []struct {
		wc   bool
		want float64
	}{{false, 2.22}, {true, 2.70}}
	for _, tc := range loads {
		got := BusLoadPct(100*float64(FrameBits(8, false, tc.wc)), 500_000)
		if math.Abs(got-tc.want) > 0.005 {
			t.Errorf("100 standard 8-byte frames/s at 500 kbit/s, worst=%v: %.3f %%, want %.2f %%", tc.wc, got, tc.want)
		}
	}
	if !math.IsNaN(BusLoadPct(1000, 0)) {
		t.Error("unknown bitrate must give NaN (shown as null)")
	}
}
