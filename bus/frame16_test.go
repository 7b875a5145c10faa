package bus

import (
	"bytes"
	"encoding/binary"
	"io"
	"testing"
	"testing/iotest"

	"go.einride.tech/can"
	"go.einride.tech/can/pkg/socketcan"
)

// Byte fixtures of struct can_frame on a little-endian host, from
// REFERENCES.md (Linux include/uapi/linux/can.h, Documentation/networking/can.rst).
var frame16Fixtures = []struct {
	name  string
	bytes []byte
	want  can.Frame
}{
	{
		name: "standard 0x456, 11 22 33",
		bytes: []byte{
			0x56, 0x04, 0x00, 0x00, // can_id 0x456
			0x03,             // len 3
			0x00, 0x00, 0x00, // pad, res, len8_dlc
			0x11, 0x22, 0x33, 0, 0, 0, 0, 0, // data
		},
		want: can.Frame{ID: 0x456, Length: 3, Data: can.Data{0x11, 0x22, 0x33}},
	},
	{
		name: "extended 0x12ABCDEF, AA 55",
		bytes: []byte{
			0xEF, 0xCD, 0xAB, 0x92, // can_id 0x12ABCDEF | CAN_EFF_FLAG
			0x02, 0x00, 0x00, 0x00,
			0xAA, 0x55, 0, 0, 0, 0, 0, 0,
		},
		want: can.Frame{ID: 0x12ABCDEF, IsExtended: true, Length: 2, Data: can.Data{0xAA, 0x55}},
	},
	{
		name: "remote 0x123",
		bytes: []byte{
			0x23, 0x01, 0x00, 0x40, // can_id 0x123 | CAN_RTR_FLAG
			0x00, 0x00, 0x00, 0x00,
			0, 0, 0, 0, 0, 0, 0, 0,
		},
		want: can.Frame{ID: 0x123, IsRemote: true},
	},
}

func TestParseFrame16(t *testing.T) {
	for _, fx := range frame16Fixtures {
		f, kind, err := ParseFrame16(fx.bytes, binary.LittleEndian)
		if err != nil || kind != KindCAN || f != fx.want {
			t.Errorf("%s: %+v %v %v, want %+v", fx.name, f, kind, err, fx.want)
		}
		if got := AppendFrame16(nil, fx.want, binary.LittleEndian); !bytes.Equal(got, fx.bytes) {
			t.Errorf("%s: AppendFrame16 = % x, want % x", fx.name, got, fx.bytes)
		}
		// einride's socketcan.Frame reads the same bytes the same way.
		var ef socketcan.Frame
		ef.UnmarshalBinary(fx.bytes)
		if ef.DecodeFrame() != fx.want {
			t.Errorf("%s: einride decodes %+v", fx.name, ef.DecodeFrame())
		}
	}
	if _, _, err := ParseFrame16(make([]byte, 15), binary.LittleEndian); err == nil {
		t.Error("15 bytes accepted")
	}
	bad := append([]byte{}, frame16Fixtures[0].bytes...)
	bad[4] = 9
	if _, _, err := ParseFrame16(bad, binary.LittleEndian); err == nil {
		t.Error("length 9 accepted")
	}
}

// The stream decoder gives the same frames however the reads split them,
// and the same as einride's Receiver over the same bytes.
func TestFrame16Stream(t *testing.T) {
	var stream []byte
	var want []can.Frame
	for i := 0; i < 50; i++ {
		fx := frame16Fixtures[i%len(frame16Fixtures)]
		stream = append(stream, fx.bytes...)
		want = append(want, fx.want)
	}
	rx := socketcan.NewReceiver(io.NopCloser(bytes.NewReader(stream)))
	var theirs []can.Frame
	for rx.Receive() {
		theirs = append(theirs, rx.Frame())
	}
	for name, r := range map[string]io.Reader{
		"whole":    bytes.NewReader(stream),
		"one-byte": iotest.OneByteReader(bytes.NewReader(stream)),
		"half":     iotest.HalfReader(bytes.NewReader(stream)),
	} {
		d := frame16Decoder{order: binary.LittleEndian}
		var got []Message
		buf := make([]byte, 40)
		for {
			n, err := r.Read(buf)
			got = d.feed(buf[:n], 1, 0, got)
			if err != nil {
				break
			}
		}
		if len(got) != len(want) || len(theirs) != len(want) {
			t.Fatalf("%s: %d frames, einride %d, want %d", name, len(got), len(theirs), len(want))
		}
		for i := range got {
			if got[i].Frame != want[i] || theirs[i] != want[i] {
				t.Fatalf("%s: frame %d = %+v, einride %+v, want %+v", name, i, got[i].Frame, theirs[i], want[i])
			}
		}
	}
}

func FuzzParseFrame16(f *testing.F) {
	for _, fx := range frame16Fixtures {
		f.Add(fx.bytes)
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		fr, kind, err := ParseFrame16(b, binary.LittleEndian)
		if err != nil || kind != KindCAN {
			return
		}
		back, _, err := ParseFrame16(AppendFrame16(nil, fr, binary.LittleEndian), binary.LittleEndian)
		if err != nil || back != fr {
			t.Fatalf("% x -> %+v -> %+v, %v", b, fr, back, err)
		}
	})
}
