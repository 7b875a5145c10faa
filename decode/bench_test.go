package decode

import (
	"testing"

	"packwatch/config"
)

// BenchmarkDecodeFrame decodes an 8-byte frame with 4 scaled fields into the
// slot values (the per-frame path; pack adds its per-slot checks on top, see
// pack's BenchmarkEngineFrame).
func BenchmarkDecodeFrame(b *testing.B) {
	p, err := config.Load("testdata/bench-4fields.toml")
	if err != nil {
		b.Fatal(err)
	}
	m, err := Compile(p)
	if err != nil {
		b.Fatal(err)
	}
	v := NewValues(m)
	msg := frame(0x4D0, 0xFF, 0x38, 0x12, 0x50, 0x4C, 0x0F, 0x41, 0x00)
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		msg.T = int64(i)
		v.Updated = v.Updated[:0]
		m.Decode(&msg, v)
	}
	if len(v.Updated) != 4 {
		b.Fatalf("updated %d", len(v.Updated))
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N), "ns/frame")
}
