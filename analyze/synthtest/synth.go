// Package synthtest makes synthetic sessions for the analysis tests and
// benchmarks: a string of cells from the simulator's one-RC cell model with
// known capacity, resistance and rest-voltage curve, written as the CAN
// frames of analyze/testdata/string4.toml (quantised as that profile
// scales them: 1 mA, 1 mV, 1 °C). Cell frames arrive 30 and 80 ms after
// each current frame, as cells do on a real bus.
package synthtest

import (
	"encoding/binary"
	"math"

	"go.einride.tech/can"

	"packwatch/bus"
	"packwatch/sim"
)

// TickS is the physics step and the finest time resolution, s.
const TickS = 0.01

// Pack is a synthetic pack driven step by step. Every method advances data
// time and hands the frames to Emit in batches.
type Pack struct {
	Model *sim.Model
	// InterconnectOhm is the resistance outside the cells (busbars, joints):
	// the reported pack voltage is the cells' sum plus InterconnectOhm·I.
	InterconnectOhm float64
	// Start is the data time of t = 0, ns.
	Start int64
	// TempC are the two sensors' readings, °C.
	TempC [2]float64
	// Main and Precharge are the contactor flags; Link the load side, V.
	Main, Precharge bool
	Link            float64
	// Emit receives each batch; it must not keep the slice.
	Emit func(batch []bus.Message)

	// Fast puts 1,000 frames a second on the bus (1 ms ticks): current and
	// pack voltage at 500/s, each cell frame at 100/s, the link at 200/s,
	// temperatures at 100/s. Set it before the first step.
	Fast bool

	tick int64
	buf  []bus.Message
}

// dt is the physics step, s.
func (p *Pack) dt() float64 {
	if p.Fast {
		return 0.001
	}
	return TickS
}

// New makes a pack of n identical cells (capacity Ah, R0, R1 Ω, C1 F) on
// the given rest-voltage table, at state of charge z0, contactor closed.
func New(n int, capAh, r0, r1, c1 float64, ocv *sim.OCVTable, z0 float64) *Pack {
	m := &sim.Model{Contactor: true, AmbientC: 24}
	for k := 0; k < n; k++ {
		c := sim.Cell{CapacityAh: capAh, R0: r0, R1: r1, C1: c1, Eta: 1, OCV: ocv}
		c.SetSOC(z0)
		m.Cells = append(m.Cells, c)
	}
	return &Pack{Model: m, TempC: [2]float64{24, 24}, Main: true, Start: 1_777_000_000_000_000_000}
}

// T is the current data time, s from the start.
func (p *Pack) T() float64 { return float64(p.tick) * p.dt() }

// Hold draws current i (A, positive charging) for d seconds.
func (p *Pack) Hold(i, d float64) {
	n := int64(math.Round(d / p.dt()))
	for k := int64(0); k < n; k++ {
		p.step(i)
	}
}

// DischargeUntil draws i (negative) until the lowest cell's terminal
// voltage reaches cellV, or for at most maxS seconds.
func (p *Pack) DischargeUntil(i, cellV, maxS float64) {
	end := p.tick + int64(maxS/p.dt())
	for p.tick < end {
		lo, _ := p.Model.CellVoltageRange(i)
		if lo <= cellV {
			return
		}
		p.step(i)
	}
}

// ChargeCCCV charges at icc until the highest cell reaches cellV, then
// holds the pack at cells × cellV until the current falls to cutoff.
func (p *Pack) ChargeCCCV(icc, cellV, cutoff, maxS float64) {
	end := p.tick + int64(maxS/p.dt())
	target := cellV * float64(len(p.Model.Cells))
	for p.tick < end {
		i := math.Min(icc, p.Model.CVCurrent(target, p.dt()))
		if i <= cutoff {
			return
		}
		p.step(i)
	}
}

// step advances one tick with current i, emitting the frames due.
func (p *Pack) step(i float64) {
	dt := p.dt()
	lo, hi := p.Model.CurrentLimits(dt)
	i = math.Min(math.Max(i, lo), hi)
	if !p.Model.Contactor {
		i = 0
	}
	t := p.Start + p.tick*int64(dt*1e9)
	if p.Fast {
		switch p.tick % 10 {
		case 0, 2, 4, 6, 8:
			p.emitCurrent(t, i)
		case 1, 5:
			p.emitLink(t)
		case 3:
			p.emitCells(t, 0, i)
		case 7:
			p.emitCells(t, 1, i)
		case 9:
			p.emitTemps(t)
		}
		p.Model.Step(i, dt)
		p.tick++
		if len(p.buf) >= 4096 {
			p.Flush()
		}
		return
	}
	ms := p.tick % 100 // position in a 1 s cycle, in ticks
	switch p.tick % 10 {
	case 0:
		p.emitCurrent(t, i)
	case 3:
		p.emitCells(t, 0, i)
	case 5:
		p.emitLink(t)
	case 8:
		p.emitCells(t, 1, i)
	}
	if ms == 50 {
		p.emitTemps(t)
	}
	p.Model.Step(i, dt)
	p.tick++
	if len(p.buf) >= 4096 {
		p.Flush()
	}
}

// Flush hands the pending frames to Emit.
func (p *Pack) Flush() {
	if len(p.buf) > 0 && p.Emit != nil {
		p.Emit(p.buf)
	}
	p.buf = p.buf[:0]
}

func (p *Pack) frame(t int64, id uint32, data []byte) {
	f := can.Frame{ID: id, Length: uint8(len(data))}
	copy(f.Data[:], data)
	p.buf = append(p.buf, bus.Message{T: t, Kind: bus.KindCAN, Frame: f})
}

func (p *Pack) emitCurrent(t int64, i float64) {
	var d [7]byte
	binary.LittleEndian.PutUint32(d[0:], uint32(int32(math.Round(i*1000))))
	v := p.Model.PackVoltage(i) + p.InterconnectOhm*i
	binary.LittleEndian.PutUint16(d[4:], uint16(math.Round(v*1000)))
	if p.Main {
		d[6] |= 1
	}
	if p.Precharge {
		d[6] |= 2
	}
	p.frame(t, 0x100, d[:])
}

func (p *Pack) emitLink(t int64) {
	var d [2]byte
	binary.LittleEndian.PutUint16(d[:], uint16(math.Round(p.Link*1000)))
	p.frame(t, 0x101, d[:])
}

func (p *Pack) emitCells(t int64, mux int, i float64) {
	d := []byte{byte(mux), 0, 0, 0, 0}
	for k := 0; k < 2; k++ {
		c := 2*mux + k
		if c >= len(p.Model.Cells) {
			break
		}
		binary.LittleEndian.PutUint16(d[1+2*k:], uint16(math.Round(p.Model.Cells[c].Voltage(i)*1000)))
	}
	p.frame(t, 0x200, d)
}

func (p *Pack) emitTemps(t int64) {
	p.frame(t, 0x300, []byte{byte(math.Round(p.TempC[0] + 40)), byte(math.Round(p.TempC[1] + 40))})
}

// KneeOCV is a rest-voltage table with one clear knee: 0.6875 V per unit of
// state of charge from 10 % to 90 %, 3 V per unit below 10 % (4.4 times
// steeper), so the knee rule with k = 3 finds it at 10 % left.
func KneeOCV() *sim.OCVTable {
	t, err := sim.NewOCVTable("test table with a knee at 10 %", []float64{0, 0.05, 0.10, 0.90, 1}, []float64{3.00, 3.30, 3.45, 4.00, 4.15})
	if err != nil {
		panic(err) // a constant table: cannot fail
	}
	return t
}
