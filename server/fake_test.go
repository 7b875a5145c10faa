package server

import (
	"fmt"
	"math"
	"sync"
	"time"

	"packwatch/pack"
)

// fakeEngine produces changing snapshots for the server tests: cells whose
// voltages move a few millivolts each tick (values on a 1 mV grid, so the
// page's 3-decimal text and Go's %.3f agree exactly), temperatures, current,
// counted charge, a pre-charge pair and a charger. over pushes one cell past
// the high limit, which raises a trip alarm. Invented data, tests only.
type fakeEngine struct {
	mu     sync.Mutex
	cells  int
	temps  int
	seq    uint64
	t0     float64
	dataT  float64
	paused bool
	over   int // cell number held above the high limit, 0 = none
	mode   string
	alarms []pack.AlarmSnap
	acked  map[uint64]bool
	last   *pack.Snapshot
	calls  int
	// preRatio, when > 0, holds the load side at this share of pack voltage
	// and mainOn the main contactor, instead of the built-in ramp.
	preRatio float64
	mainOn   bool
	// empty sends a pack with no readings at all: nil lists and numbers.
	empty bool
	// twoPacks adds a second pack "b" with the first 16 cells of "a".
	twoPacks bool
}

func (f *fakeEngine) setPrecharge(ratio float64, mainOn bool) {
	f.mu.Lock()
	f.preRatio, f.mainOn = ratio, mainOn
	f.mu.Unlock()
}

func newFakeEngine(cells, temps int) *fakeEngine {
	return &fakeEngine{cells: cells, temps: temps, t0: 1.7e9, dataT: 1.7e9, acked: map[uint64]bool{}}
}

func (f *fakeEngine) setPaused(p bool) { f.mu.Lock(); f.paused = p; f.mu.Unlock() }
func (f *fakeEngine) setOver(n int)    { f.mu.Lock(); f.over = n; f.mu.Unlock() }

func np(x float64) *pack.Num { n := pack.Num(x); return &n }

// mv rounds to whole millivolts.
func mv(v float64) float64 { return math.Round(v*1000) / 1000 }

// Snapshot implements Engine. Paused, it returns the previous snapshot
// unchanged (same seq), as a paused replay would.
func (f *fakeEngine) Snapshot(now time.Time) *pack.Snapshot {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.calls++
	if f.paused && f.last != nil {
		return f.last
	}
	f.seq++
	f.dataT += 0.1
	if f.empty {
		f.last = &pack.Snapshot{Seq: f.seq, ServerTime: now.UTC().Format(time.RFC3339Nano), DataT: pack.Num(f.dataT), Mode: f.mode,
			Packs: []pack.PackSnapshot{{ID: "a", Name: "Empty pack", State: "nodata"}}}
		return f.last
	}
	k := float64(f.seq)
	lo, hi, warn := 3.0, 4.15, 0.05
	p := pack.PackSnapshot{
		ID: "a", Name: "Test pack A", State: "ok", VoltageSource: "reported",
		Limits: pack.LimitsSnap{CellLowV: pack.Num(lo), CellHighV: pack.Num(hi), WarnCellV: pack.Num(warn), TempHighC: np(55), TempLowC: np(-10), WarnTempC: 5},
	}
	sum, minV, maxV := 0.0, math.Inf(1), math.Inf(-1)
	minC, maxC := 0, 0
	for i := 1; i <= f.cells; i++ {
		v := mv(3.9 + 0.02*math.Sin(k/7+float64(i)) + 0.001*float64(i%5))
		st := "ok"
		if i == f.over {
			v = 4.2
		}
		switch {
		case v >= hi || v <= lo:
			st = "trip"
		case v >= hi-warn || v <= lo+warn:
			st = "warn"
		}
		if i == 3 && f.cells > 5 {
			st = "stale"
		}
		p.Cells = append(p.Cells, pack.CellSnap{N: i, V: np(v), State: st, Age: np(0.1)})
		sum += v
		if v < minV {
			minV, minC = v, i
		}
		if v > maxV {
			maxV, maxC = v, i
		}
	}
	if minC > 0 {
		p.Cells[minC-1].Min = true
		p.Cells[maxC-1].Max = true
	}
	avg := sum / float64(f.cells)
	p.CellStats = pack.CellStats{Min: np(minV), MinCell: minC, Max: np(maxV), MaxCell: maxC, Avg: np(avg), Spread: np(maxV - minV), Deviation: np(maxV - avg), DevCell: maxC, Reporting: f.cells - 1}
	hot, hotN := math.Inf(-1), 0
	for i := 1; i <= f.temps; i++ {
		c := math.Round((25+float64(i)+math.Sin(k/20))*10) / 10
		p.Temps = append(p.Temps, pack.TempSnap{N: i, C: np(c), Role: "cell", State: "ok", Age: np(0.5)})
		if c > hot {
			hot, hotN = c, i
		}
	}
	p.TempStats = pack.TempStats{Min: p.Temps[0].C, MinSensor: 1, Max: np(hot), MaxSensor: hotN, RiseCPerMin: np(0.2)}
	cur := -40 - 5*math.Sin(k/15)
	p.Current = np(cur)
	p.Voltage = np(sum)
	p.Power = np(cur * sum)
	p.CurrentWord = "discharging"
	p.SOC = pack.SOCSnap{Pct: np(71.5), Source: "counted", AhIn: 0.5, AhOut: pack.Num(k * 0.001), WhIn: 180, WhOut: pack.Num(k * 0.35), ToEmptyS: np(6400), CapacityAh: 60}
	p.Margins = []pack.Margin{
		{Limit: "cell_high", Label: "Cell high", Unit: "V", Value: np(maxV), Bound: pack.Num(hi), Margin: np(hi - maxV), Warn: pack.Num(warn), State: stateOf(hi-maxV, warn), Subject: fmt.Sprintf("cell %d", maxC)},
		{Limit: "cell_low", Label: "Cell low", Unit: "V", Value: np(minV), Bound: pack.Num(lo), Margin: np(minV - lo), Warn: pack.Num(warn), State: stateOf(minV-lo, warn), Subject: fmt.Sprintf("cell %d", minC), ToLimitS: np(5400)},
		{Limit: "temp_high", Label: "Temperature high", Unit: "°C", Value: np(hot), Bound: 55, Margin: np(55 - hot), Warn: 5, State: "ok", Subject: fmt.Sprintf("sensor %d", hotN), ToLimitS: nil},
	}
	if f.over > 0 {
		found := false
		for _, a := range f.alarms {
			if a.Limit == "cell_high" && a.Active {
				found = true
			}
		}
		if !found {
			f.alarms = append(f.alarms, pack.AlarmSnap{ID: uint64(len(f.alarms) + 1), Limit: "cell_high", Label: "Cell high", Subject: fmt.Sprintf("cell %d", f.over), Level: "trip", Since: pack.Num(f.dataT), Value: np(4.2), Active: true})
		}
		p.State = "trip"
	}
	for i := range f.alarms {
		f.alarms[i].Acked = f.acked[f.alarms[i].ID]
	}
	p.Alarms = append([]pack.AlarmSnap(nil), f.alarms...)
	link := sum * math.Min(1, k/30)
	main := 0.0
	if k > 30 {
		main = 1
	}
	if f.preRatio > 0 {
		link, main = sum*f.preRatio, 0
		if f.mainOn {
			main = 1
		}
	}
	p.Values = []pack.ValueSnap{
		{Bind: "link.voltage", Value: np(link), Unit: "V", Age: np(0.1), State: "ok"},
		{Bind: "contactor.precharge", Value: np(1 - main), Age: np(0.1), State: "ok"},
		{Bind: "contactor.main", Value: np(main), Age: np(0.1), State: "ok"},
		{Bind: "charger.voltage", Value: np(sum + 0.4), Unit: "V", Age: np(0.5), State: "ok"},
		{Bind: "charger.current", Value: np(0), Unit: "A", Age: np(0.5), State: "ok"},
		{Bind: "bms.state", Value: np(2), Text: "drive", Age: np(0.2), State: "ok"},
		{Bind: "fault.overcurrent", Value: np(0), Age: np(9), State: "stale"},
	}
	p.Sources = []pack.SourceSnap{
		{Name: "pack-can", Kind: "socketcan", State: "connected", Age: np(0.01), RateHz: 412, Messages: uint64(k * 41), DecodeErrors: 0, Unknown: 3},
		{Name: "console", Kind: "serial-text", State: "disconnected", Reason: "device not found", RateHz: 0, Diagnosis: "no data: check the cable and the port name"},
	}
	s := &pack.Snapshot{Seq: f.seq, ServerTime: now.UTC().Format(time.RFC3339Nano), DataT: pack.Num(f.dataT), Mode: f.mode, Packs: []pack.PackSnapshot{p}}
	if f.twoPacks {
		b := p
		b.ID, b.Name, b.State, b.Alarms = "b", "Test pack B", "ok", nil
		b.Cells = p.Cells[:min(16, len(p.Cells))]
		s.Packs = append(s.Packs, b)
	}
	f.last = s
	return s
}

func stateOf(margin, warn float64) string {
	switch {
	case margin <= 0:
		return "trip"
	case margin <= warn:
		return "warn"
	}
	return "ok"
}

// Ack implements Engine.
func (f *fakeEngine) Ack(packID string, id uint64) error {
	f.mu.Lock()
	defer f.mu.Unlock()
	if packID != "a" {
		return fmt.Errorf("no pack %q", packID)
	}
	for _, a := range f.alarms {
		if a.ID == id {
			f.acked[id] = true
			return nil
		}
	}
	return fmt.Errorf("pack %s: no alarm %d", packID, id)
}

// fakeBus is a bus view of the engine's type: one known ID and one unknown.
func fakeBus() any {
	return pack.BusView{DataT: 1.7e9, Sources: []pack.BusSource{{
		Pack: "a", Name: "pack-can", Kind: "socketcan", Device: "can0", Bitrate: 500000, State: "connected",
		Messages: 1212, Unknown: 12, RateHz: 11, LoadPct: np(23.5),
		IDs: []pack.BusID{
			{ID: 0x301, Hex: "0x301", Count: 1200, RateHz: 10, Len: 8, Data: "0f5a0f600f580f61", Age: np(0.05), Known: true,
				Fields: []pack.BusField{{Bind: "cell[1].voltage", Value: np(3.93), Unit: "V", State: "ok"}}},
			{ID: 0x7ff, Hex: "0x7FF", Count: 12, RateHz: 1, Len: 2, Data: "beef", Age: np(0.5), Known: false},
		},
	}}}
}
