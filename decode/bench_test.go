package decode

import (
	"testing"

	"packwatch/bus"
)

// BenchmarkDecodeFrame decodes an 8-byte frame with 4 scaled fields into the
// slot values (the per-frame path; pack adds its per-slot checks on top, see
// pack's BenchmarkEngineFrame).
func BenchmarkDecodeFrame(b *testing.B) {
	m := load(b, header+`
[[frame]]
id = 0x4D0
period_ms = 50
  [[frame.field]]
  bind = "pack.current"
  byte = 0
  size = 2
  order = "big"
  signed = true
  scale = 0.1
  [[frame.field]]
  bind = "pack.voltage"
  byte = 2
  size = 2
  order = "big"
  scale = 0.01
  [[frame.field]]
  bind = "cell[1].voltage"
  byte = 4
  size = 2
  scale = 0.001
  [[frame.field]]
  bind = "temp[1]"
  byte = 6
  size = 1
  offset = -40
`)
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
	_ = bus.KindCAN
}
