package record

import (
	"context"
	"encoding/binary"
	"errors"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
)

// packTraffic makes n frames of the invented demo pack: 12 cells in three
// frames of four 16-bit millivolt values, a temperature frame, a pack frame
// (current, voltage, charge, rolling counter) and a status frame, 125 µs
// apart with jitter, as on a saturated 1 Mbit/s bus (about 8,000 frames/s).
// Payloads change slowly: a cell moves a millivolt or two between frames.
func packTraffic(n int, seed uint64) []bus.Message {
	rng := rand.New(rand.NewPCG(seed, 99))
	var cells [12]int
	for i := range cells {
		cells[i] = 3650 + rng.IntN(60)
	}
	temps := [6]byte{65, 66, 64, 67, 65, 66} // °C + 40
	current, volts, soc := -312, 4410, 6120
	var counter byte
	cycle := []uint32{0x301, 0x302, 0x303, 0x320, 0x301, 0x302, 0x303, 0x320, 0x310, 0x330}
	out := make([]bus.Message, n)
	t := int64(1_773_000_000e9)
	for i := range out {
		t += 125_000 + rng.Int64N(40_000) - 20_000
		id := cycle[i%len(cycle)]
		f := can.Frame{ID: id, Length: 8}
		switch id {
		case 0x301, 0x302, 0x303:
			base := int(id-0x301) * 4
			for c := range 4 {
				cells[base+c] += rng.IntN(3) - 1
				binary.LittleEndian.PutUint16(f.Data[2*c:], uint16(cells[base+c]))
			}
		case 0x310:
			if rng.IntN(50) == 0 {
				temps[rng.IntN(6)] += byte(rng.IntN(3)) - 1
			}
			copy(f.Data[:], temps[:])
		case 0x320:
			current += rng.IntN(5) - 2
			if rng.IntN(20) == 0 {
				volts--
				soc--
			}
			binary.LittleEndian.PutUint16(f.Data[0:], uint16(int16(current)))
			binary.LittleEndian.PutUint16(f.Data[2:], uint16(volts))
			binary.LittleEndian.PutUint16(f.Data[4:], uint16(soc))
			counter++
			f.Data[6] = counter & 0x0f
		case 0x330:
			f.Data[0] = 0x01
			f.Length = 4
		}
		out[i] = bus.Message{T: t, Kind: bus.KindCAN, Frame: f}
	}
	return out
}

const benchBatch = 64

// emptySize is the size of a recording with no data, subtracted from the
// file size for bytes per frame.
func emptySize(b *testing.B) int64 {
	path := filepath.Join(b.TempDir(), "empty.db")
	w, err := Create(path, testMeta, Options{})
	if err != nil {
		b.Fatal(err)
	}
	w.Close()
	st, _ := os.Stat(path)
	return st.Size()
}

// BenchmarkRecordFrames records realistic pack traffic through Writer.Write
// in batches of 64 (the writer waits instead of dropping, so the rate is
// sustained end to end, commits and close included). Metrics: frames/s,
// bytes on disk per frame, CPU per frame (all goroutines, user + system)
// and that CPU as a share of one core at a saturated bus of 8,000 frames/s.
func BenchmarkRecordFrames(b *testing.B) {
	traffic := packTraffic(1<<16, 1)
	span := traffic[len(traffic)-1].T - traffic[0].T + 125_000
	empty := emptySize(b)
	path := filepath.Join(b.TempDir(), "bench.db")
	w, err := Create(path, testMeta, Options{Lossless: true})
	if err != nil {
		b.Fatal(err)
	}
	batch := make([]bus.Message, benchBatch)
	cpu0 := cpuTime()
	b.ResetTimer()
	start := time.Now()
	for done := 0; done < b.N; {
		n := min(benchBatch, b.N-done)
		for j := range n {
			k := done + j
			batch[j] = traffic[k%len(traffic)]
			batch[j].T += int64(k/len(traffic)) * span
		}
		w.Write(batch[:n])
		done += n
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	elapsed := time.Since(start)
	cpu := cpuTime() - cpu0
	b.StopTimer()
	st, err := os.Stat(path)
	if err != nil {
		b.Fatal(err)
	}
	if d := w.Dropped(); d != 0 {
		b.Fatalf("%d dropped", d)
	}
	b.ReportMetric(float64(b.N)/elapsed.Seconds(), "frames/s")
	b.ReportMetric(float64(st.Size()-empty)/float64(b.N), "B/frame")
	if cpu > 0 {
		perFrame := float64(cpu) / float64(b.N)
		b.ReportMetric(perFrame, "cpu-ns/frame")
		b.ReportMetric(perFrame*8000/1e9*100, "%core@8k")
	}
}

// scanFile is a recording of realistic traffic for BenchmarkScanRecording.
func scanFile(b *testing.B, frames int) string {
	path := filepath.Join(b.TempDir(), "scan.db")
	w, err := Create(path, testMeta, Options{Lossless: true})
	if err != nil {
		b.Fatal(err)
	}
	traffic := packTraffic(1<<16, 2)
	span := traffic[len(traffic)-1].T - traffic[0].T + 125_000
	batch := make([]bus.Message, benchBatch)
	for done := 0; done < frames; done += benchBatch {
		for j := range batch {
			k := done + j
			batch[j] = traffic[k%len(traffic)]
			batch[j].T += int64(k/len(traffic)) * span
		}
		w.Write(batch)
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
	return path
}

var errEnough = errors.New("enough")

// BenchmarkScanRecording reads raw messages back with Reader.Scan from a
// recording of 2 M frames, scanning it again as often as b.N frames need.
// One op is one frame.
func BenchmarkScanRecording(b *testing.B) {
	path := scanFile(b, 2<<20)
	r, err := Open(path)
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	ctx := context.Background()
	cpu0 := cpuTime()
	b.ResetTimer()
	start := time.Now()
	var n int
	var sum uint32
	for n < b.N {
		err := r.Scan(ctx, math.MinInt64, math.MaxInt64, func(batch []bus.Message) error {
			for i := range batch {
				sum += batch[i].Frame.ID
			}
			n += len(batch)
			if n >= b.N {
				return errEnough
			}
			return nil
		})
		if err != nil && err != errEnough {
			b.Fatal(err)
		}
	}
	elapsed := time.Since(start)
	cpu := cpuTime() - cpu0
	b.ReportMetric(float64(n)/elapsed.Seconds(), "frames/s")
	if cpu > 0 {
		b.ReportMetric(float64(cpu)/float64(n), "cpu-ns/frame")
	}
	if sum == 0 {
		b.Fatal("nothing read")
	}
}

// BenchmarkEncode measures the block encoder alone (ns per frame).
func BenchmarkEncode(b *testing.B) {
	traffic := packTraffic(1<<16, 3)
	var e blockEncoder
	e.reset()
	var out []byte
	var bytes int
	b.ResetTimer()
	for i := range b.N {
		e.add(&traffic[i&(1<<16-1)])
		if e.full() {
			out = e.seal(out[:0])
			bytes += len(out)
			e.reset()
		}
	}
	if bytes > 0 {
		b.ReportMetric(float64(bytes)/float64(b.N-e.n), "B/frame")
	}
}

// BenchmarkDecode measures the block decoder alone (ns per frame).
func BenchmarkDecode(b *testing.B) {
	blocks := encodeAll(packTraffic(1<<16, 4))
	var d blockDecoder
	var batch []bus.Message
	b.ResetTimer()
	for n := 0; n < b.N; {
		for _, blk := range blocks {
			var err error
			batch, err = d.decode(blk, batch[:0])
			if err != nil {
				b.Fatal(err)
			}
			n += len(batch)
		}
	}
}

// BenchmarkOpen opens a recording of 2 M frames (header, schema, quick_check,
// metadata). Metric: MB/s of file checked.
func BenchmarkOpen(b *testing.B) {
	path := scanFile(b, 2<<20)
	st, _ := os.Stat(path)
	b.ResetTimer()
	for range b.N {
		r, err := Open(path)
		if err != nil {
			b.Fatal(err)
		}
		r.Close()
	}
	b.ReportMetric(float64(st.Size())/1e6*float64(b.N)/b.Elapsed().Seconds(), "MB/s")
}

// BenchmarkRecordLive8k records at the pace of a saturated bus, 8,000
// frames/s of wall time, written every 5 ms in batches (as a bus reader
// delivers them) through the default (dropping) writer with its 250 ms
// commits. One op is one second; run with -benchtime=3x. Metrics: CPU of the
// whole process as % of one core, and the same for the pacing loop alone
// (no writer) to subtract.
func BenchmarkRecordLive8k(b *testing.B) {
	for _, withWriter := range []bool{true, false} {
		name := "writer"
		if !withWriter {
			name = "loop-only"
		}
		b.Run(name, func(b *testing.B) {
			traffic := packTraffic(64000, 6)
			var w *Writer
			if withWriter {
				var err error
				if w, err = Create(filepath.Join(b.TempDir(), "live.db"), testMeta, Options{}); err != nil {
					b.Fatal(err)
				}
			}
			tick := time.NewTicker(5 * time.Millisecond)
			defer tick.Stop()
			cpu0 := cpuTime()
			start := time.Now()
			b.ResetTimer()
			k, sum := 0, 0
			for total := 8000 * b.N; k < total; {
				<-tick.C
				due := min(total, int(time.Since(start).Seconds()*8000))
				for k < due {
					i := k % len(traffic)
					n := min(due-k, len(traffic)-i)
					if w != nil {
						w.Write(traffic[i : i+n])
					} else {
						sum += int(traffic[i].Frame.ID)
					}
					k += n
				}
			}
			if w != nil {
				if err := w.Close(); err != nil {
					b.Fatal(err)
				}
				if d := w.Dropped(); d != 0 {
					b.Fatalf("%d dropped", d)
				}
			}
			cpu := cpuTime() - cpu0
			elapsed := time.Since(start)
			b.ReportMetric(float64(k)/elapsed.Seconds(), "frames/s")
			if cpu > 0 {
				b.ReportMetric(float64(cpu)/float64(elapsed)*100, "%core")
			}
			_ = sum
		})
	}
}
