package bus

import (
	"encoding/binary"
	"fmt"
	"io"

	"go.einride.tech/can"
)

// The 16-byte frame layout of Linux struct can_frame
// (include/uapi/linux/can.h):
//
//	offset 0   can_id  u32  ID with flags EFF 0x80000000, RTR 0x40000000, ERR 0x20000000
//	offset 4   len     u8   payload length 0..8
//	offset 5   pad, res, len8_dlc (ignored)
//	offset 8   data    [8]u8
//
// can_id is in host order on a SocketCAN socket; over TCP (tcp-can) it is
// little-endian, as go.einride.tech/can/pkg/socketcan writes it.
const (
	// FrameSize is the size of one frame in the 16-byte layout.
	FrameSize = 16

	canEFFFlag = 0x80000000
	canRTRFlag = 0x40000000
	canERRFlag = 0x20000000
	canSFFMask = 0x7FF
	canEFFMask = 0x1FFFFFFF
)

// ParseFrame16 decodes one 16-byte frame. kind is KindCAN for a data or
// remote frame and KindError for an error frame, whose ID then holds the
// error class bits (CAN_ERR_MASK) and whose data the details. Data bytes past
// the length are zeroed. A length above 8 is an error.
func ParseFrame16(b []byte, order binary.ByteOrder) (f can.Frame, kind Kind, err error) {
	if len(b) < FrameSize {
		return f, 0, fmt.Errorf("frame of %d bytes, want %d", len(b), FrameSize)
	}
	raw := order.Uint32(b[0:4])
	n := b[4]
	if n > 8 {
		return f, 0, fmt.Errorf("frame length %d", n)
	}
	f.Length = n
	copy(f.Data[:n], b[8:8+n])
	switch {
	case raw&canERRFlag != 0:
		f.ID = raw & canEFFMask
		return f, KindError, nil
	case raw&canEFFFlag != 0:
		f.ID, f.IsExtended = raw&canEFFMask, true
	default:
		f.ID = raw & canSFFMask
	}
	f.IsRemote = raw&canRTRFlag != 0
	return f, KindCAN, nil
}

// AppendFrame16 appends f in the 16-byte layout.
func AppendFrame16(dst []byte, f can.Frame, order binary.ByteOrder) []byte {
	raw := f.ID & canSFFMask
	if f.IsExtended {
		raw = f.ID&canEFFMask | canEFFFlag
	}
	if f.IsRemote {
		raw |= canRTRFlag
	}
	n := min(f.Length, 8)
	var b [FrameSize]byte
	order.PutUint32(b[0:4], raw)
	b[4] = n
	copy(b[8:], f.Data[:n])
	return append(dst, b[:]...)
}

// frame16Decoder cuts a byte stream into 16-byte frames, keeping a partial
// frame between calls.
type frame16Decoder struct {
	order   binary.ByteOrder
	carry   [FrameSize]byte
	n       int
	frames  uint64
	errs    uint64
	bad     uint64
	lastErr can.Frame // the latest error frame, for the hint
}

func (d *frame16Decoder) feed(p []byte, t int64, src uint16, out []Message) []Message {
	if d.n > 0 {
		k := copy(d.carry[d.n:], p)
		d.n += k
		p = p[k:]
		if d.n < FrameSize {
			return out
		}
		out = d.one(d.carry[:], t, src, out)
		d.n = 0
	}
	for len(p) >= FrameSize {
		out = d.one(p[:FrameSize], t, src, out)
		p = p[FrameSize:]
	}
	d.n = copy(d.carry[:], p)
	return out
}

func (d *frame16Decoder) one(b []byte, t int64, src uint16, out []Message) []Message {
	f, kind, err := ParseFrame16(b, d.order)
	if err != nil {
		d.bad++
		return out
	}
	if kind == KindError {
		d.errs++
		d.lastErr = f
	} else {
		d.frames++
	}
	return append(out, Message{T: t, Src: src, Kind: kind, Frame: f})
}

func (d *frame16Decoder) reset() { d.n = 0 }

// FrameWriter writes frames in the 16-byte layout, little-endian, as the
// tcp-can source reads them. The simulator and load tests use it.
type FrameWriter struct {
	w   io.Writer
	buf []byte
}

// NewFrameWriter returns a FrameWriter on w.
func NewFrameWriter(w io.Writer) *FrameWriter { return &FrameWriter{w: w} }

// WriteFrame writes one frame.
func (fw *FrameWriter) WriteFrame(f can.Frame) error {
	return fw.WriteFrames([]can.Frame{f})
}

// WriteFrames writes frames with one Write call.
func (fw *FrameWriter) WriteFrames(fs []can.Frame) error {
	fw.buf = fw.buf[:0]
	for _, f := range fs {
		fw.buf = AppendFrame16(fw.buf, f, binary.LittleEndian)
	}
	if _, err := fw.w.Write(fw.buf); err != nil {
		return fmt.Errorf("write %d frames: %w", len(fs), err)
	}
	return nil
}
