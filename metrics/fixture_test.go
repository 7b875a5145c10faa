package metrics

import (
	"math"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
	"packwatch/pack"
)

const (
	ms      = int64(time.Millisecond)
	sec     = int64(time.Second)
	epoch   = int64(1_780_000_000) * sec // an arbitrary data-time origin
	example = "../config/examples/buoy-winch.toml"
)

// Two packs of the example profile share one engine. The engine's sources
// are 0 bms and 1 console of pack A, 2 bms and 3 console of pack B.
const (
	packA = "winch-a"
	packB = "winch-b"
)

func loadMap(t testing.TB) *decode.Map {
	t.Helper()
	p, err := config.Load(example)
	if err != nil {
		t.Fatalf("load profile: %v", err)
	}
	m, err := decode.Compile(p)
	if err != nil {
		t.Fatalf("compile: %v", err)
	}
	return m
}

// newTwoPacks makes a live engine with packs A and B of the example profile,
// each on its own pair of sources.
func newTwoPacks(t testing.TB) *pack.Engine {
	t.Helper()
	e := pack.NewEngine(pack.Options{Mode: "live"})
	if err := e.AddPack(packA, loadMap(t), []int{0, 1, -1, -1}); err != nil {
		t.Fatal(err)
	}
	if err := e.AddPack(packB, loadMap(t), []int{-1, -1, 0, 1}); err != nil {
		t.Fatal(err)
	}
	return e
}

// scene is what one pack's BMS reports, encoded by frames in the layout of
// the example profile (config/examples/buoy-winch.toml): 0x4C0 muxed by
// byte 0, three cells per frame in mV little-endian at bytes 1, 3, 5; 0x4D0
// current in 0.1 A big-endian signed at bytes 0–1, voltage in 0.01 V
// big-endian at 2–3, contactor byte 5 bit 0, state byte 6; 0x4E0 three
// temperatures, one byte each, raw − 40 °C, 0xFF meaning no reading.
type scene struct {
	src     uint16 // engine index of the pack's CAN source
	cells   [12]float64
	amps    float64
	temps   [3]float64
	tempRaw [3]int // ≥ 0 overrides the raw byte
	noTemps bool   // the temperature frame is not sent
	noPower bool   // the current and voltage frame is not sent
	silent  bool   // nothing is sent
}

func newScene(src uint16) *scene {
	s := &scene{src: src, amps: -18, temps: [3]float64{25, 26, 27}, tempRaw: [3]int{-1, -1, -1}}
	for i := range s.cells {
		s.cells[i] = 3.700 + 0.005*float64(i%3)
	}
	return s
}

func (s *scene) msg(t int64, id uint32, data ...byte) bus.Message {
	f := can.Frame{ID: id, Length: uint8(len(data))}
	copy(f.Data[:], data)
	return bus.Message{T: t, Src: s.src, Kind: bus.KindCAN, Frame: f}
}

// frames gives what the BMS sends at 50 ms step k (data time t): current
// and voltage every step, one cell frame every other step (all 12 cells
// every 400 ms), temperatures every 10th.
func (s *scene) frames(t int64, k int) []bus.Message {
	if s.silent {
		return nil
	}
	var out []bus.Message
	if !s.noPower {
		v := 0.0
		for _, c := range s.cells {
			v += c
		}
		a := uint16(int16(math.Round(s.amps * 10)))
		vv := uint16(math.Round(v * 100))
		out = append(out, s.msg(t, 0x4D0, byte(a>>8), byte(a), byte(vv>>8), byte(vv), 0, 1, 2, 0))
	}
	if k%2 == 0 {
		mux := (k / 2) % 4
		d := []byte{byte(mux), 0, 0, 0, 0, 0, 0, 0}
		for j := 0; j < 3; j++ {
			mv := uint16(math.Round(s.cells[3*mux+j] * 1000))
			d[1+2*j], d[2+2*j] = byte(mv), byte(mv>>8)
		}
		out = append(out, s.msg(t, 0x4C0, d...))
	}
	if k%10 == 0 && !s.noTemps {
		d := make([]byte, 3)
		for j := range d {
			d[j] = byte(int(math.Round(s.temps[j])) + 40)
			if s.tempRaw[j] >= 0 {
				d[j] = byte(s.tempRaw[j])
			}
		}
		out = append(out, s.msg(t, 0x4E0, d...))
	}
	return out
}

// rig drives two packs and hands a snapshot to observe every 100 ms of data
// time, as the hub would at its tick.
type rig struct {
	e       *pack.Engine
	a, b    *scene
	t       int64 // data time of the next step
	observe func(*pack.Snapshot)
	last    *pack.Snapshot
}

func newRig(t testing.TB, observe func(*pack.Snapshot)) *rig {
	r := &rig{e: newTwoPacks(t), a: newScene(0), b: newScene(2), t: epoch, observe: observe}
	r.b.amps = 20 // B charges
	for i := range r.b.cells {
		r.b.cells[i] = 3.950 - 0.004*float64(i%4)
	}
	return r
}

// run advances d of data time; change, if set, edits the scenes before
// each 50 ms step.
func (r *rig) run(d time.Duration, change func(t int64)) {
	end := r.t + int64(d)
	for ; r.t < end; r.t += 50 * ms {
		if change != nil {
			change(r.t)
		}
		k := int((r.t - epoch) / (50 * ms))
		batch := append(r.a.frames(r.t, k), r.b.frames(r.t, k)...)
		if len(batch) > 0 {
			r.e.Deliver(batch)
		}
		if k%2 == 1 {
			r.snap()
		}
	}
}

// snap takes a snapshot now and observes it.
func (r *rig) snap() *pack.Snapshot {
	s := r.e.Snapshot(time.Unix(0, r.t))
	r.last = s
	if r.observe != nil {
		r.observe(s)
	}
	return s
}
