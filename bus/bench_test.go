package bus

import (
	"encoding/binary"
	"testing"

	"go.einride.tech/can"
)

// benchSLCANStream is realistic serial-line CAN traffic: 8-byte standard
// frames on a few IDs, some with adapter timestamps, some extended.
func benchSLCANStream(frames int) []byte {
	var b []byte
	for i := 0; i < frames; i++ {
		f := can.Frame{ID: 0x4C0 + uint32(i%8), Length: 8}
		for j := range f.Data {
			f.Data[j] = byte(i*7 + j)
		}
		if i%10 == 9 {
			f.ID, f.IsExtended = 0x18FF50E5, true
		}
		b = AppendSLCAN(b, f)
		if i%2 == 1 { // a timestamp on every other line
			b = append(b[:len(b)-1], '1', 'F', '4', '0', '\r')
		}
	}
	return b
}

// The serial-can decode path as the source runs it: 4 KiB reads into
// messages.
func BenchmarkSerialCANDecode(b *testing.B) {
	const frames = 10000
	stream := benchSLCANStream(frames)
	a := newSerialCANAdapter(Spec{})
	out := make([]Message, 0, 512)
	b.SetBytes(int64(len(stream)))
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		for p := stream; len(p) > 0; {
			n := min(4096, len(p))
			out = a.decode(p[:n], 1, 0, out[:0])
			p = p[n:]
		}
	}
	b.StopTimer()
	if got := a.dec.Stats().Frames; got != uint64(frames*b.N) {
		b.Fatalf("decoded %d frames, want %d", got, frames*b.N)
	}
	fps := float64(frames*b.N) / b.Elapsed().Seconds()
	b.ReportMetric(fps, "frames/s")
	b.ReportMetric(fps/8000, "x-saturated-1M-bus")
}

func BenchmarkParseSLCAN(b *testing.B) {
	line := []byte("t4C08DEADBEEF00010203")
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		if _, _, _, err := ParseSLCAN(line); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkLineSplitter(b *testing.B) {
	var stream []byte
	for i := 0; i < 1000; i++ {
		stream = append(stream, "cell 12: 3712 mV  temp 4: 24.5 C\r\n"...)
	}
	var sp LineSplitter
	n := 0
	b.SetBytes(int64(len(stream)))
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		for p := stream; len(p) > 0; {
			k := min(4096, len(p))
			sp.Feed(p[:k], func(string) { n++ })
			p = p[k:]
		}
	}
	b.ReportMetric(float64(n)/b.Elapsed().Seconds(), "lines/s")
}

// The 16-byte frame path of socketcan and tcp-can: 4 KiB reads into messages.
func BenchmarkFrame16Decode(b *testing.B) {
	var stream []byte
	for i := 0; i < 4096; i++ {
		f := can.Frame{ID: 0x4C0 + uint32(i%8), Length: 8}
		f.Data[0] = byte(i)
		stream = AppendFrame16(stream, f, binary.LittleEndian)
	}
	d := frame16Decoder{order: binary.LittleEndian}
	out := make([]Message, 0, 256)
	b.SetBytes(int64(len(stream)))
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		for p := stream; len(p) > 0; {
			n := min(4096, len(p))
			out = d.feed(p[:n], 1, 0, out[:0])
			p = p[n:]
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(4096*b.N), "ns/frame")
}
