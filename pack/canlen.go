package pack

// FrameBits is the length in bits of a classical CAN data frame with n data
// bytes (0–8; more counts as 8) and an 11-bit (extended false) or 29-bit
// identifier. With worstCase the largest number of stuff bits is included:
//
//	C = 8n + g + 13 + floor((g + 8n − 1) / 4)
//
// where g is 34 (11-bit ID) or 54 (29-bit ID): the bits exposed to stuffing
// apart from the data, and 13 counts the CRC delimiter, the ACK slot and
// delimiter, 7 end-of-frame and 3 interframe bits. Without worstCase the
// stuffing term is left out. A remote frame carries no data bytes: pass n = 0.
func FrameBits(n int, extended, worstCase bool) int {
	if n < 0 {
		n = 0
	}
	if n > 8 {
		n = 8
	}
	g := 34
	if extended {
		g = 54
	}
	bits := 8*n + g + 13
	if worstCase {
		bits += (g + 8*n - 1) / 4
	}
	return bits
}

// BusLoadPct is the share of a bus's capacity, in percent, that bitsPerSecond
// of frames occupy at the given bitrate (bit/s). It returns NaN when the
// bitrate is unknown (0 or less).
func BusLoadPct(bitsPerSecond float64, bitrate int) float64 {
	if bitrate <= 0 {
		return nan
	}
	return 100 * bitsPerSecond / float64(bitrate)
}
