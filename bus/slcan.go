package bus

import (
	"errors"
	"fmt"

	"go.einride.tech/can"
)

// The ASCII serial-line CAN protocol, as the Linux kernel's slcan driver
// speaks it. A frame is one line: a type letter, the ID in hex, one DLC digit,
// the data bytes in hex, an optional 4-digit adapter timestamp, then CR.
//
//	t 456 3 112233        standard data frame, ID 0x456, 3 bytes
//	T 12ABCDEF 2 AA55     extended data frame, ID 0x12ABCDEF, 2 bytes
//	r 123 0               standard remote frame (never carries data)
//	R 12ABCDEF 8          extended remote frame, DLC 8, no data bytes
//	t 456 3 112233 1F40   the same frame with the adapter's timestamp 0x1F40
//
// (spaces added for reading; the wire has none).

// Errors returned by ParseSLCAN; each is wrapped with the detail.
var (
	// ErrSLCANType is a line that does not start with t, T, r or R.
	ErrSLCANType = errors.New("slcan: not a frame line")
	// ErrSLCANSyntax is a frame line with a bad length, digit or value.
	ErrSLCANSyntax = errors.New("slcan: malformed frame")
)

const (
	slcanStdIDLen = 3
	slcanExtIDLen = 8
	slcanTSLen    = 4
	// slcanMaxLine is the longest valid frame line without its CR:
	// T + 8 ID digits + DLC + 16 data digits + 4 timestamp digits.
	slcanMaxLine = 1 + slcanExtIDLen + 1 + 16 + slcanTSLen
)

// hexVal maps an ASCII byte to its hex value, or 0xFF when it is not a hex
// digit. Both cases are accepted, as the kernel's parser does.
var hexVal = func() (t [256]byte) {
	for i := range t {
		t[i] = 0xFF
	}
	for c := '0'; c <= '9'; c++ {
		t[c] = byte(c - '0')
	}
	for c := 'a'; c <= 'f'; c++ {
		t[c] = byte(c - 'a' + 10)
		t[c-'a'+'A'] = byte(c - 'a' + 10)
	}
	return t
}()

// ParseSLCAN parses one frame line of the ASCII serial-line CAN protocol
// (Linux drivers/net/can/slcan/slcan-core.c), without its CR terminator:
// "t4563112233", "T12ABCDEF2AA55", "r1230", "R12ABCDEF8". If the adapter
// appends a 4-digit hex timestamp (milliseconds, wrapping at 60000 on most
// adapters) it is returned with hasTS true.
//
// It is stricter than the kernel: a standard ID above 0x7FF, an extended ID
// above 0x1FFFFFFF and trailing bytes other than a 4-digit timestamp are
// errors, so that line noise at a wrong baud rate is counted instead of
// turning into frames. Errors wrap ErrSLCANType or ErrSLCANSyntax.
func ParseSLCAN(line []byte) (f can.Frame, ts uint16, hasTS bool, err error) {
	if len(line) == 0 {
		return f, 0, false, fmt.Errorf("empty line: %w", ErrSLCANType)
	}
	idLen := slcanStdIDLen
	switch line[0] {
	case 't':
	case 'T':
		idLen, f.IsExtended = slcanExtIDLen, true
	case 'r':
		f.IsRemote = true
	case 'R':
		idLen, f.IsExtended, f.IsRemote = slcanExtIDLen, true, true
	default:
		return f, 0, false, fmt.Errorf("type %q: %w", line[0], ErrSLCANType)
	}
	if len(line) < 1+idLen+1 {
		return can.Frame{}, 0, false, fmt.Errorf("%d bytes, too short: %w", len(line), ErrSLCANSyntax)
	}
	var id uint32
	for _, c := range line[1 : 1+idLen] {
		v := hexVal[c]
		if v == 0xFF {
			return can.Frame{}, 0, false, fmt.Errorf("ID digit %q: %w", c, ErrSLCANSyntax)
		}
		id = id<<4 | uint32(v)
	}
	if (!f.IsExtended && id > 0x7FF) || id > 0x1FFFFFFF {
		return can.Frame{}, 0, false, fmt.Errorf("ID %#x out of range: %w", id, ErrSLCANSyntax)
	}
	f.ID = id
	d := line[1+idLen]
	if d < '0' || d > '8' {
		return can.Frame{}, 0, false, fmt.Errorf("DLC %q: %w", d, ErrSLCANSyntax)
	}
	f.Length = d - '0'
	rest := line[2+idLen:]
	if !f.IsRemote {
		n := int(f.Length) * 2
		if len(rest) < n {
			return can.Frame{}, 0, false, fmt.Errorf("%d data digits for DLC %d: %w", len(rest), f.Length, ErrSLCANSyntax)
		}
		for i := 0; i < int(f.Length); i++ {
			hi, lo := hexVal[rest[2*i]], hexVal[rest[2*i+1]]
			if hi == 0xFF || lo == 0xFF {
				return can.Frame{}, 0, false, fmt.Errorf("data byte %d: %w", i, ErrSLCANSyntax)
			}
			f.Data[i] = hi<<4 | lo
		}
		rest = rest[n:]
	}
	switch len(rest) {
	case 0:
		return f, 0, false, nil
	case slcanTSLen:
		for _, c := range rest {
			v := hexVal[c]
			if v == 0xFF {
				return can.Frame{}, 0, false, fmt.Errorf("timestamp digit %q: %w", c, ErrSLCANSyntax)
			}
			ts = ts<<4 | uint16(v)
		}
		return f, ts, true, nil
	}
	return can.Frame{}, 0, false, fmt.Errorf("%d trailing bytes: %w", len(rest), ErrSLCANSyntax)
}

const hexUpper = "0123456789ABCDEF"

// AppendSLCAN appends f as one line of the ASCII serial-line CAN protocol,
// terminated by CR, in the form the Linux slcan driver transmits (upper-case
// hex, no timestamp): "t4563112233\r". A remote frame carries its DLC and no
// data. Length above 8 is clamped to 8.
func AppendSLCAN(dst []byte, f can.Frame) []byte {
	typ, idLen := byte('t'), slcanStdIDLen
	id := f.ID & 0x7FF
	if f.IsExtended {
		typ, idLen, id = 'T', slcanExtIDLen, f.ID&0x1FFFFFFF
	}
	if f.IsRemote {
		typ -= 't' - 'r'
	}
	n := f.Length
	if n > 8 {
		n = 8
	}
	dst = append(dst, typ)
	for i := idLen - 1; i >= 0; i-- {
		dst = append(dst, hexUpper[(id>>(4*uint(i)))&0xF])
	}
	dst = append(dst, '0'+n)
	if !f.IsRemote {
		for _, b := range f.Data[:n] {
			dst = append(dst, hexUpper[b>>4], hexUpper[b&0xF])
		}
	}
	return append(dst, '\r')
}

// SLCANBitrateCommand returns the S0..S8 command (without CR) for a CAN
// bitrate in bit/s, from the table of the Linux slcan driver: 10k, 20k, 50k,
// 100k, 125k, 250k, 500k, 800k, 1M. Other rates are an error.
func SLCANBitrateCommand(bitrate int) (string, error) {
	for i, r := range slcanBitrates {
		if r == bitrate {
			return fmt.Sprintf("S%d", i), nil
		}
	}
	return "", fmt.Errorf("bitrate %d bit/s: the serial-line CAN protocol knows only 10k, 20k, 50k, 100k, 125k, 250k, 500k, 800k and 1M", bitrate)
}

var slcanBitrates = [...]int{10000, 20000, 50000, 100000, 125000, 250000, 500000, 800000, 1000000}

// SLCANOpenSequence returns the bytes a serial-can source writes to its
// adapter after every (re)connect: close any open channel (C), set the bitrate
// (S0..S8; omitted when bitrate is 0, keeping the adapter's setting), then
// open listen-only (L) or, when normal is true, normal (O). Each command ends
// with CR.
func SLCANOpenSequence(bitrate int, normal bool) ([]byte, error) {
	seq := []byte("C\r")
	if bitrate != 0 {
		s, err := SLCANBitrateCommand(bitrate)
		if err != nil {
			return nil, err
		}
		seq = append(append(seq, s...), '\r')
	}
	if normal {
		return append(seq, "O\r"...), nil
	}
	return append(seq, "L\r"...), nil
}

// SLCANCloseCommand is the command a serial-can source writes on exit.
const SLCANCloseCommand = "C\r"
