package record

import (
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"math"
	"math/bits"

	"packwatch/bus"
)

// A block holds up to MaxBlockMessages messages in the layout below. All
// integers are varints as in encoding/binary; times are in microseconds, so a
// recording keeps message times to 1 µs (the nanoseconds below are dropped,
// rounding toward minus infinity).
//
//	version   byte     blockVersion (1)
//	count     uvarint  number of messages (≥ 1)
//	base      varint   time of the first message, µs since the Unix epoch
//	nkeys     uvarint  number of dictionary entries
//	key       uvarint  nkeys times: a message key (see packKey)
//	message            count times:
//	  tag     uvarint  slot<<1, +1 when the time went backwards
//	  dt      uvarint  |time − previous time| in µs (the first message: from base)
//	  for a text kind (line, gap):
//	    n     uvarint  length of the text, then n bytes of UTF-8 (not checked)
//	  for a frame kind (CAN, error) with length > 0:
//	    mask  byte     bit i set when byte i of data XOR the slot's previous
//	                   data differs from zero (the first use of a slot in the
//	                   block XORs with zeros)
//	    bytes          the non-zero XOR bytes, lowest index first
//	crc       4 bytes  CRC-32C (Castagnoli) of all the above, little-endian
//
// A key packs what stays the same between messages of one slot:
//
//	bits  0–31  CAN ID (with the error class bits for an error frame)
//	bits 32–39  frame length (bytes stored: min(length, 8))
//	bit  40     extended (29-bit) ID
//	bit  41     remote frame
//	bits 42–47  message kind (bus.Kind, < 64)
//	bits 48–63  source index
//
// Bytes of Frame.Data beyond the frame's length are not stored and read back
// as zeros; Text is stored only for the text kinds and Frame only for the
// others.
const (
	blockVersion = 1
	// MaxBlockMessages is the most messages a block holds; a block is sealed
	// when it reaches this count.
	MaxBlockMessages = 4096
	// maxBlockKeys seals a block early when it has seen this many distinct keys.
	maxBlockKeys = 1024
	// maxBlockBytes seals a block early when its body reaches this size (long
	// text lines).
	maxBlockBytes = 1 << 20
	// maxKind is the first message kind that cannot be recorded.
	maxKind = 64

	tableBits = 11
	tableSize = 1 << tableBits
)

// ErrCorrupt is wrapped by every error about damaged recorded data.
var ErrCorrupt = errors.New("recording is damaged")

var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// isText reports whether messages of kind k carry Text rather than a frame.
func isText(k bus.Kind) bool { return k == bus.KindLine || k == bus.KindGap }

// packKey returns the dictionary key of m.
func packKey(m *bus.Message) uint64 {
	k := uint64(m.Src)<<48 | uint64(m.Kind)<<42
	if isText(m.Kind) {
		return k
	}
	k |= uint64(m.Frame.ID) | uint64(m.Frame.Length)<<32
	if m.Frame.IsExtended {
		k |= 1 << 40
	}
	if m.Frame.IsRemote {
		k |= 1 << 41
	}
	return k
}

// payloadLen is the number of data bytes stored for a frame of length l.
func payloadLen(l uint8) int {
	if l > 8 {
		return 8
	}
	return int(l)
}

// lenMask keeps the low n bytes of a little-endian uint64.
var lenMask = [9]uint64{0, 0xff, 0xffff, 0xffffff, 0xffffffff, 0xffffffffff,
	0xffffffffffff, 0xffffffffffffff, 0xffffffffffffffff}

type tableEntry struct {
	key  uint64
	slot uint32
	gen  uint32
}

// blockEncoder builds one block. Its zero value is not ready: call reset.
type blockEncoder struct {
	body  []byte
	n     int
	base  int64 // µs, time of the first message
	last  int64 // µs, time of the previous message
	minT  int64 // ns, smallest stored time
	maxT  int64 // ns, largest stored time
	keys  []uint64
	prev  []uint64 // per slot: previous payload (frame kinds)
	gen   uint32
	table [tableSize]tableEntry
}

func (e *blockEncoder) reset() {
	e.body = e.body[:0]
	e.n = 0
	e.keys = e.keys[:0]
	e.prev = e.prev[:0]
	e.gen++
	if e.gen == 0 { // wrapped: forget every old entry
		e.table = [tableSize]tableEntry{}
		e.gen = 1
	}
}

// full reports whether the block must be sealed before another message.
func (e *blockEncoder) full() bool {
	return e.n >= MaxBlockMessages || len(e.keys) >= maxBlockKeys || len(e.body) >= maxBlockBytes
}

// The range of recordable times in µs: back in ns, they fit an int64.
const (
	minMicros = math.MinInt64 / 1000 // truncated toward zero: -9223372036854775
	maxMicros = math.MaxInt64 / 1000
)

// floorMicros converts ns to µs rounding toward minus infinity (within the
// recordable range: the first 808 ns of int64 time are stored as minMicros).
func floorMicros(t int64) int64 {
	q := t / 1000
	if t%1000 < 0 && q > minMicros {
		q--
	}
	return q
}

// slot returns the dictionary slot of key, adding it when new.
func (e *blockEncoder) slot(key uint64) int {
	h := (key * 0x9E3779B97F4A7C15) >> (64 - tableBits)
	for {
		en := &e.table[h]
		if en.gen != e.gen {
			s := len(e.keys)
			*en = tableEntry{key: key, slot: uint32(s), gen: e.gen}
			e.keys = append(e.keys, key)
			e.prev = append(e.prev, 0)
			return s
		}
		if en.key == key {
			return int(en.slot)
		}
		h = (h + 1) & (tableSize - 1)
	}
}

// add appends m to the block. The caller seals the block when full() says so.
// A message of a kind that cannot be recorded returns false and is skipped.
func (e *blockEncoder) add(m *bus.Message) bool {
	if m.Kind >= maxKind {
		return false
	}
	t := floorMicros(m.T)
	if e.n == 0 {
		e.base, e.last = t, t
		e.minT, e.maxT = t*1000, t*1000
	}
	s := e.slot(packKey(m))
	d := t - e.last
	e.last = t
	tag := uint64(s) << 1
	if d < 0 {
		tag |= 1
		d = -d
	}
	if tn := t * 1000; tn < e.minT {
		e.minT = tn
	} else if tn > e.maxT {
		e.maxT = tn
	}
	b := appendUvarint(e.body, tag)
	b = appendUvarint(b, uint64(d))
	if isText(m.Kind) {
		b = appendUvarint(b, uint64(len(m.Text)))
		b = append(b, m.Text...)
	} else if pl := payloadLen(m.Frame.Length); pl > 0 {
		data := binary.LittleEndian.Uint64(m.Frame.Data[:]) & lenMask[pl]
		x := data ^ e.prev[s]
		e.prev[s] = data
		mi := len(b)
		b = append(b, 0)
		var mask byte
		for x != 0 {
			i := bits.TrailingZeros64(x) >> 3
			mask |= 1 << i
			b = append(b, byte(x>>(i*8)))
			x &^= 0xff << (i * 8)
		}
		b[mi] = mask
	}
	e.body = b
	e.n++
	return true
}

// seal appends the finished block (header, dictionary, body, CRC) to dst and
// returns it. The encoder must be reset before reuse.
func (e *blockEncoder) seal(dst []byte) []byte {
	start := len(dst)
	dst = append(dst, blockVersion)
	dst = appendUvarint(dst, uint64(e.n))
	dst = binary.AppendVarint(dst, e.base)
	dst = appendUvarint(dst, uint64(len(e.keys)))
	for _, k := range e.keys {
		dst = appendUvarint(dst, k)
	}
	dst = append(dst, e.body...)
	crc := crc32.Checksum(dst[start:], castagnoli)
	return binary.LittleEndian.AppendUint32(dst, crc)
}

func appendUvarint(b []byte, v uint64) []byte {
	for v >= 0x80 {
		b = append(b, byte(v)|0x80)
		v >>= 7
	}
	return append(b, byte(v))
}

// slotInfo is a decoded dictionary entry.
type slotInfo struct {
	tmpl bus.Message // Src, Kind and the frame's ID, length and flags
	text bool
	pl   int
	prev uint64
}

func corrupt(format string, a ...any) error {
	return fmt.Errorf("%w: block: %s", ErrCorrupt, fmt.Sprintf(format, a...))
}

// blockDecoder decodes blocks, reusing its dictionary between calls.
type blockDecoder struct {
	slots []slotInfo
}

// decode appends the messages of block b to dst. A damaged block returns an
// error wrapping ErrCorrupt and dst unchanged; it never panics.
func (d *blockDecoder) decode(b []byte, dst []bus.Message) ([]bus.Message, error) {
	if len(b) < 5 {
		return dst, corrupt("%d bytes is too short", len(b))
	}
	body := b[:len(b)-4]
	if want, got := binary.LittleEndian.Uint32(b[len(b)-4:]), crc32.Checksum(body, castagnoli); want != got {
		return dst, corrupt("checksum %08x, want %08x", got, want)
	}
	if body[0] != blockVersion {
		return dst, corrupt("unknown block version %d", body[0])
	}
	p := 1
	count, p, ok := uvarintAt(body, p)
	if !ok || count == 0 || count > MaxBlockMessages {
		return dst, corrupt("bad message count")
	}
	base, n := binary.Varint(body[p:])
	if n <= 0 || base < minMicros || base > maxMicros {
		return dst, corrupt("bad base time")
	}
	p += n
	nkeys, p, ok := uvarintAt(body, p)
	if !ok || nkeys == 0 || nkeys > count {
		return dst, corrupt("bad dictionary size")
	}
	d.slots = d.slots[:0]
	for range nkeys {
		var k uint64
		k, p, ok = uvarintAt(body, p)
		if !ok {
			return dst, corrupt("truncated dictionary")
		}
		var s slotInfo
		s.tmpl.Src = uint16(k >> 48)
		s.tmpl.Kind = bus.Kind(k >> 42 & 63)
		s.text = isText(s.tmpl.Kind)
		if s.text {
			if k&(1<<42-1) != 0 {
				return dst, corrupt("text key with frame fields")
			}
		} else {
			s.tmpl.Frame.ID = uint32(k)
			s.tmpl.Frame.Length = uint8(k >> 32)
			s.tmpl.Frame.IsExtended = k&(1<<40) != 0
			s.tmpl.Frame.IsRemote = k&(1<<41) != 0
			s.pl = payloadLen(s.tmpl.Frame.Length)
		}
		d.slots = append(d.slots, s)
	}
	// Every message takes at least two bytes: a forged count cannot make us
	// allocate much more than the block's size.
	if count*2 > uint64(len(body)-p) {
		return dst, corrupt("%d messages cannot fit in %d bytes", count, len(body)-p)
	}
	start := len(dst)
	dst = growMessages(dst, int(count))
	out := dst[start:]
	t := base
	for i := range out {
		var tag, dt uint64
		// The common cases: a one-byte tag and a one- or two-byte step.
		if p+2 < len(body) && body[p]|body[p+1] < 0x80 {
			tag, dt = uint64(body[p]), uint64(body[p+1])
			p += 2
		} else if p+2 < len(body) && body[p] < 0x80 && body[p+2] < 0x80 {
			tag, dt = uint64(body[p]), uint64(body[p+1]&0x7f)|uint64(body[p+2])<<7
			p += 3
		} else {
			tag, p, ok = uvarintAt(body, p)
			if !ok {
				return dst[:start], corrupt("truncated at message %d", i)
			}
			dt, p, ok = uvarintAt(body, p)
			if !ok {
				return dst[:start], corrupt("truncated at message %d", i)
			}
		}
		si := tag >> 1
		if si >= uint64(len(d.slots)) {
			return dst[:start], corrupt("message %d refers to slot %d of %d", i, si, len(d.slots))
		}
		if dt > maxMicros-minMicros {
			return dst[:start], corrupt("time step out of range at message %d", i)
		}
		if tag&1 != 0 {
			t -= int64(dt)
		} else {
			t += int64(dt)
		}
		if t < minMicros || t > maxMicros {
			return dst[:start], corrupt("time out of range at message %d", i)
		}
		s := &d.slots[si]
		m := &out[i]
		*m = s.tmpl
		m.T = t * 1000
		if s.text {
			var l uint64
			l, p, ok = uvarintAt(body, p)
			if !ok || l > uint64(len(body)-p) {
				return dst[:start], corrupt("bad text length at message %d", i)
			}
			m.Text = string(body[p : p+int(l)])
			p += int(l)
			continue
		}
		if s.pl == 0 {
			continue
		}
		if p >= len(body) {
			return dst[:start], corrupt("truncated at message %d", i)
		}
		mask := body[p]
		p++
		if mask>>s.pl != 0 || p+bits.OnesCount8(mask) > len(body) {
			return dst[:start], corrupt("bad data mask at message %d", i)
		}
		var x uint64
		for mask != 0 {
			j := bits.TrailingZeros8(mask)
			x |= uint64(body[p]) << (j * 8)
			p++
			mask &^= 1 << j
		}
		s.prev ^= x
		binary.LittleEndian.PutUint64(m.Frame.Data[:], s.prev)
	}
	if p != len(body) {
		return dst[:start], corrupt("%d bytes left after the last message", len(body)-p)
	}
	return dst, nil
}

// uvarintAt reads a uvarint at b[p:], returning the value and the next position.
func uvarintAt(b []byte, p int) (uint64, int, bool) {
	if p < len(b) && b[p] < 0x80 {
		return uint64(b[p]), p + 1, true
	}
	if p > len(b) {
		return 0, p, false
	}
	v, n := binary.Uvarint(b[p:])
	if n <= 0 {
		return 0, p, false
	}
	return v, p + n, true
}

// growMessages extends dst by n zero-cost elements (their content is
// overwritten by the caller).
func growMessages(dst []bus.Message, n int) []bus.Message {
	if cap(dst)-len(dst) < n {
		nd := make([]bus.Message, len(dst), len(dst)+n+len(dst)/4)
		copy(nd, dst)
		dst = nd
	}
	return dst[:len(dst)+n]
}

// blockInfo is what the blocks table stores beside a block.
type blockInfo struct {
	t0, t1 int64 // ns, first and last stored message time (min and max)
	n      int
}
