package pack

import (
	"testing"
	"time"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
)

// benchProfile has one frame of 4 fields (current, voltage, a cell, a
// temperature), the same as decode's BenchmarkDecodeFrame, with limits on
// each so that every field runs its trip-timer checks.
const benchProfile = "../decode/testdata/bench-4fields.toml"

// BenchmarkEngineFrame is the per-frame cost of Engine.Deliver: decode of 4
// fields, their limit checks with trip timers, the charge counter, and the
// aggregate tick when due, in batches of 1 and 64 frames 1 ms of data time
// apart (a frame rate near a saturated 1 Mbit/s bus).
func BenchmarkEngineFrame(b *testing.B) {
	for _, size := range []int{0, 1, 64} {
		b.Run(map[int]string{0: "decode-only", 1: "batch1", 64: "batch64"}[size], func(b *testing.B) {
			p, err := config.Load(benchProfile)
			if err != nil {
				b.Fatal(err)
			}
			m, err := decode.Compile(p)
			if err != nil {
				b.Fatal(err)
			}
			e := NewEngine(Options{})
			if err := e.AddPack("b", m, nil); err != nil {
				b.Fatal(err)
			}
			batch := make([]bus.Message, max(size, 1))
			for i := range batch {
				batch[i] = canMsg(0, 0x4D0, 0xFF, 0x38, 0x12, 0x50, 0x4C, 0x0F, 0x41, 0x00)
			}
			t := epoch
			b.ReportAllocs()
			frames := 0
			cpu0 := cpuTimeNs()
			if size == 0 {
				// The decoder alone on the same frame, for the share pack adds.
				v := decode.NewValues(m)
				for b.Loop() {
					t += ms
					batch[0].T = t
					v.Updated = v.Updated[:0]
					m.Decode(&batch[0], v)
					frames++
				}
			}
			for size > 0 && b.Loop() {
				for i := range batch {
					t += ms
					batch[i].T = t
				}
				e.Deliver(batch)
				frames += size
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(frames), "ns/frame")
			if cpu0 >= 0 {
				// CPU time of the whole process (GC included) per frame: on a
				// shared machine this is steadier than wall time.
				b.ReportMetric(float64(cpuTimeNs()-cpu0)/float64(frames), "cpu-ns/frame")
			}
		})
	}
}

// BenchmarkSnapshot is the cost of one Snapshot of the example pack (12
// cells, 3 sensors, every binding reporting), taken 10 times a second by the
// hub.
func BenchmarkSnapshot(b *testing.B) {
	e := newTestEngine(b, "")
	drive(e, newScene(), epoch, epoch+70*sec, 64, nil)
	b.ReportAllocs()
	for b.Loop() {
		e.Snapshot(time.Unix(0, 0))
	}
}
