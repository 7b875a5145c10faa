package pack

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"strings"
	"testing"
	"time"

	"go.einride.tech/can"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
)

const (
	ms      = int64(1e6)
	epoch   = int64(1_780_000_000) * sec // an arbitrary data-time origin
	example = "../config/examples/buoy-winch.toml"
)

func loadMap(t testing.TB, extra string) *decode.Map {
	t.Helper()
	var p *config.Profile
	var err error
	if extra == "" {
		p, err = config.Load(example)
	} else {
		var data []byte
		data, err = os.ReadFile(example)
		if err == nil {
			p, err = config.Parse("test.toml", append(data, extra...))
		}
	}
	if err != nil {
		t.Fatalf("load profile: %v", err)
	}
	m, err := decode.Compile(p)
	if err != nil {
		t.Fatalf("compile: %v", err)
	}
	return m
}

func newTestEngine(t testing.TB, extra string) *Engine {
	t.Helper()
	e := NewEngine(Options{Mode: "simulated"})
	if err := e.AddPack("winch", loadMap(t, extra), nil); err != nil {
		t.Fatal(err)
	}
	return e
}

func canMsg(t int64, id uint32, data ...byte) bus.Message {
	f := can.Frame{ID: id, Length: uint8(len(data)), IsExtended: id > 0x7FF}
	copy(f.Data[:], data)
	return bus.Message{T: t, Kind: bus.KindCAN, Frame: f}
}

// scene is the state the hand-built frames of the example profile carry.
// The layout is the example's (config/examples/buoy-winch.toml): 0x4C0 mux
// byte 0, three cells per frame, mV little-endian at bytes 1, 3, 5; 0x4D0
// current 0.1 A big-endian signed at 0, voltage 0.01 V big-endian at 2,
// contactor byte 5 bit 0, state byte 6; 0x4E0 temperatures +40 °C, 1 byte each.
type scene struct {
	cells   [12]float64
	amps    float64
	volts   float64 // 0: the sum of the cells
	temps   [3]float64
	tempRaw [3]int // ≥ 0 overrides the raw byte
	noTemps bool
	noPower bool
}

func newScene() *scene {
	s := &scene{amps: -18, temps: [3]float64{25, 26, 27}, tempRaw: [3]int{-1, -1, -1}}
	for i := range s.cells {
		s.cells[i] = 3.700 + 0.005*float64(i%3)
	}
	return s
}

// frames gives what the BMS sends at 50 ms tick k (data time t).
func (s *scene) frames(t int64, k int) []bus.Message {
	var out []bus.Message
	if !s.noPower {
		v := s.volts
		if v == 0 {
			for _, c := range s.cells {
				v += c
			}
		}
		a := uint16(int16(math.Round(s.amps * 10)))
		vv := uint16(math.Round(v * 100))
		out = append(out, canMsg(t, 0x4D0, byte(a>>8), byte(a), byte(vv>>8), byte(vv), 0, 1, 2, 0))
	}
	if k%2 == 0 {
		mux := (k / 2) % 4
		d := []byte{byte(mux), 0, 0, 0, 0, 0, 0, 0}
		for j := 0; j < 3; j++ {
			mv := uint16(math.Round(s.cells[3*mux+j] * 1000))
			d[1+2*j], d[2+2*j] = byte(mv), byte(mv>>8)
		}
		out = append(out, canMsg(t, 0x4C0, d...))
	}
	if k%10 == 0 && !s.noTemps {
		d := make([]byte, 3)
		for j := range d {
			d[j] = byte(int(math.Round(s.temps[j])) + 40)
			if s.tempRaw[j] >= 0 {
				d[j] = byte(s.tempRaw[j])
			}
		}
		out = append(out, canMsg(t, 0x4E0, d...))
	}
	return out
}

// drive sends the scene's frames every 50 ms of data time in [from, to),
// in batches of batch messages; change, if set, edits the scene before each
// tick.
func drive(e *Engine, s *scene, from, to int64, batch int, change func(t int64, s *scene)) {
	var buf []bus.Message
	for t := from; t < to; t += 50 * ms {
		if change != nil {
			change(t, s)
		}
		buf = append(buf, s.frames(t, int((t-epoch)/(50*ms)))...)
		if len(buf) >= batch {
			e.Deliver(buf)
			buf = buf[:0]
		}
	}
	if len(buf) > 0 {
		e.Deliver(buf)
	}
}

func snap(t *testing.T, e *Engine) PackSnapshot {
	t.Helper()
	s := e.Snapshot(time.Unix(0, 0))
	if _, err := json.Marshal(s); err != nil {
		t.Fatalf("marshal snapshot: %v", err)
	}
	return s.Packs[0]
}

func margin(p PackSnapshot, lim string) *Margin {
	for i := range p.Margins {
		if p.Margins[i].Limit == lim {
			return &p.Margins[i]
		}
	}
	return nil
}

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

func TestEngineExample(t *testing.T) {
	e := newTestEngine(t, "")
	s := newScene()
	s.cells[6] = 3.650 // cell 7 lowest
	s.cells[10] = 3.760
	drive(e, s, epoch, epoch+10*sec, 16, nil)
	p := snap(t, e)

	cs := p.CellStats
	if cs.Reporting != 12 || cs.MinCell != 7 || cs.MaxCell != 11 {
		t.Fatalf("cell stats %+v, want 12 reporting, min cell 7, max cell 11", cs)
	}
	sum := 0.0
	for _, c := range s.cells {
		sum += c
	}
	if !near(float64(*cs.Min), 3.650, 1e-9) || !near(float64(*cs.Max), 3.760, 1e-9) ||
		!near(float64(*cs.Spread), 0.110, 1e-9) || !near(float64(*cs.Avg), sum/12, 1e-9) {
		t.Errorf("min %v max %v spread %v avg %v", *cs.Min, *cs.Max, *cs.Spread, *cs.Avg)
	}
	if !p.Cells[6].Min || !p.Cells[10].Max {
		t.Error("min/max cell flags not set")
	}
	// Reported pack voltage and power P = V·I.
	if p.VoltageSource != "reported" || !near(float64(*p.Voltage), math.Round(sum*100)/100, 1e-9) {
		t.Errorf("voltage %v from %s", p.Voltage, p.VoltageSource)
	}
	if !near(float64(*p.Power), float64(*p.Voltage)*-18, 1e-9) || p.CurrentWord != "discharging" {
		t.Errorf("power %v, word %q", *p.Power, p.CurrentWord)
	}
	// −18 A held for the 9.95 s between the first and last current reading.
	if !near(float64(p.SOC.AhOut), 18*9.95/3600, 1e-9) || p.SOC.AhIn != 0 {
		t.Errorf("Ah out %v in %v, want %v", p.SOC.AhOut, p.SOC.AhIn, 18*9.95/3600)
	}
	// No [soc] start and no pack.soc: start "rest", a rough start from the
	// table before any rest: uncertain.
	if p.SOC.Source != "uncertain" || p.SOC.Pct == nil {
		t.Errorf("SOC %+v, want an uncertain estimate", p.SOC)
	}
	if p.SOC.ToEmptyS == nil || p.SOC.ToFullS != nil {
		t.Errorf("discharging: time to empty %v, to full %v", p.SOC.ToEmptyS, p.SOC.ToFullS)
	}
	// Temperatures and roles: sensor 3 is a busbar sensor in the example.
	if len(p.Temps) != 3 || p.Temps[2].Role != "busbar" || float64(*p.Temps[1].C) != 26 || p.TempStats.MaxSensor != 3 {
		t.Errorf("temps %+v stats %+v", p.Temps, p.TempStats)
	}
	// Margins: every limit of the example, nearest first; the spread (0.11
	// of 0.25) is farther than the low cell (0.65 of warn 0.05 → 13 warns)…
	if len(p.Margins) != 7 { // cell high/low, spread, temp high/low, charge, discharge current (charge temp: not charging)
		t.Errorf("%d margins: %+v", len(p.Margins), p.Margins)
	}
	for i := 1; i < len(p.Margins); i++ {
		a, b := p.Margins[i-1], p.Margins[i]
		if a.State == b.State && float64(*a.Margin)/float64(a.Warn) > float64(*b.Margin)/float64(b.Warn) {
			t.Errorf("margins not sorted nearest first at %d: %s %v/%v before %s %v/%v", i, a.Limit, *a.Margin, a.Warn, b.Limit, *b.Margin, b.Warn)
		}
	}
	if m := margin(p, "cell_low"); m == nil || !near(float64(*m.Margin), 0.65, 1e-9) || m.Subject != "cell 7" || m.State != "ok" {
		t.Errorf("cell_low margin %+v", m)
	}
	if m := margin(p, "discharge_current"); m == nil || !near(float64(*m.Margin), 382, 1e-9) || m.State != "ok" {
		t.Errorf("discharge margin %+v", m)
	}
	if p.State != "ok" || len(p.Alarms) != 0 {
		t.Errorf("state %s alarms %+v", p.State, p.Alarms)
	}
	// Values: enums and flags in words.
	for _, v := range p.Values {
		switch v.Bind {
		case "bms.state":
			if v.Text != "discharging" {
				t.Errorf("bms.state text %q", v.Text)
			}
		case "contactor.main":
			if v.Text != "true" {
				t.Errorf("contactor text %q", v.Text)
			}
		}
	}
	if src := p.Sources[0]; src.Messages == 0 || src.Diagnosis != "" || !near(float64(src.RateHz), 20+10+2, 0.5) {
		t.Errorf("source %+v", src)
	}
	// The console source sent nothing: the diagnosis says so.
	if src := p.Sources[1]; !strings.Contains(src.Diagnosis, "no lines at all") {
		t.Errorf("console diagnosis %q", src.Diagnosis)
	}
}

// PROFILE-SPEC.md "State and timing": past a limit for trip_after_ms →
// tripped, at exactly that data time; cleared when back inside by half the
// warn margin for clear_after_ms; a trip stays until acknowledged.
func TestEngineTripTiming(t *testing.T) {
	e := newTestEngine(t, "")
	s := newScene()
	for i := range s.cells {
		s.cells[i] = 4.10 // so that the spread stays inside 0.25 V
	}
	drive(e, s, epoch, epoch+2*sec, 1, nil)
	// Cell 5 (mux 1) is sent at 2.1, 2.5, 2.9, 3.3 s…; it goes to 4.30 V
	// (limit 4.25) at 2.1 s. trip_after_ms = 1000 in the example.
	s.cells[4] = 4.30
	t0 := epoch + 2100*ms
	drive(e, s, epoch+2*sec, t0+999*ms, 1, nil)
	if p := snap(t, e); len(p.Alarms) != 0 || p.Cells[4].State != "warn" {
		t.Fatalf("tripped before trip_after: alarms %+v, cell state %s", p.Alarms, p.Cells[4].State)
	}
	// The timer ends at 3.1 s, before the next cell-5 reading (3.3 s): any
	// message at or after 3.1 s trips the check, one just before does not.
	e.Deliver([]bus.Message{canMsg(t0+1000*ms-1, 0x7FF)})
	if p := snap(t, e); len(p.Alarms) != 0 {
		t.Fatalf("tripped 1 ns early: %+v", p.Alarms)
	}
	drive(e, s, t0+1000*ms, t0+1050*ms, 1, nil)
	p := snap(t, e)
	if len(p.Alarms) != 1 {
		t.Fatalf("alarms %+v, want one trip", p.Alarms)
	}
	a := p.Alarms[0]
	if a.Limit != "cell_high" || a.Subject != "cell 5" || !a.Active || a.Level != "trip" ||
		!near(float64(a.Since), float64(t0)/1e9, 1e-6) || !near(float64(*a.Value), 4.30, 1e-9) {
		t.Errorf("alarm %+v", a)
	}
	if p.State != "trip" || p.Cells[4].State != "trip" || p.Margins[0].Limit != "cell_high" || p.Margins[0].State != "trip" {
		t.Errorf("state %s, cell %s, first margin %+v", p.State, p.Cells[4].State, p.Margins[0])
	}
	if err := e.Ack("winch", a.ID); err != nil {
		t.Fatal(err)
	}
	if err := e.Ack("winch", a.ID+100); !errors.Is(err, ErrNoAlarm) {
		t.Errorf("ack of unknown alarm: %v", err)
	}
	// Back to 4.22 V: inside by 0.03 ≥ warn/2 = 0.025 V. Its frame comes at
	// 3.3 s: the clear timer (3000 ms) ends at 6.3 s.
	s.cells[4] = 4.22
	drive(e, s, t0+1050*ms, epoch+6250*ms, 1, nil)
	if p := snap(t, e); len(p.Alarms) != 1 || !p.Alarms[0].Acked || !p.Alarms[0].Active {
		t.Fatalf("cleared early: %+v", p.Alarms)
	}
	drive(e, s, epoch+6250*ms, epoch+6350*ms, 1, nil)
	if p := snap(t, e); len(p.Alarms) != 0 || p.Cells[4].State != "warn" {
		t.Errorf("after clear_after: alarms %+v (an acknowledged trip leaves when cleared), cell %s", p.Alarms, p.Cells[4].State)
	}
}

func TestEngineUnackedTripStays(t *testing.T) {
	e := newTestEngine(t, "")
	s := newScene()
	s.cells[0] = 2.9
	drive(e, s, epoch, epoch+3*sec, 8, nil)
	s.cells[0] = 3.7
	drive(e, s, epoch+3*sec, epoch+10*sec, 8, nil)
	p := snap(t, e)
	// Cell 1 at 2.9 V trips cell_low and, 0.8 V under the others, spread.
	if len(p.Alarms) != 2 || p.Alarms[0].Active || p.Alarms[0].Limit != "cell_low" || p.Alarms[1].Active || p.Alarms[1].Limit != "spread" {
		t.Fatalf("alarms %+v, want inactive cell_low and spread trips", p.Alarms)
	}
	if p.State != "warn" {
		t.Errorf("unacknowledged trip: state %s, want warn", p.State)
	}
	e.AckAll("winch")
	if p := snap(t, e); len(p.Alarms) != 0 || p.State != "ok" {
		t.Errorf("after ack: %+v, %s", p.Alarms, p.State)
	}
}

func TestEngineGapStopsIntegration(t *testing.T) {
	tests := []struct {
		name string
		gap  func(e *Engine, s *scene)
	}{
		{"gap message", func(e *Engine, s *scene) {
			e.Deliver([]bus.Message{{T: epoch + 10*sec, Kind: bus.KindGap, Text: "reconnect"}})
			s.noPower = true
			drive(e, s, epoch+10*sec, epoch+20*sec, 8, nil)
			s.noPower = false
		}},
		{"current silent over 3 intervals", func(e *Engine, s *scene) {
			s.noPower = true
			drive(e, s, epoch+10*sec, epoch+20*sec, 8, nil)
			s.noPower = false
		}},
	}
	for _, tc := range tests {
		e := newTestEngine(t, "")
		s := newScene()
		s.amps = -36
		drive(e, s, epoch, epoch+10*sec, 8, nil)
		tc.gap(e, s)
		drive(e, s, epoch+20*sec, epoch+30*sec, 8, nil)
		p := snap(t, e)
		// Two stretches of 9.95 s at 36 A, nothing across the 10 s gap.
		if want := 36 * 2 * 9.95 / 3600; !near(float64(p.SOC.AhOut), want, 1e-9) {
			t.Errorf("%s: Ah out %v, want %v", tc.name, p.SOC.AhOut, want)
		}
		if p.SOC.Source != "uncertain" {
			t.Errorf("%s: SOC source %s, want uncertain", tc.name, p.SOC.Source)
		}
	}
}

func TestEngineStartNumberAndSerialReset(t *testing.T) {
	e := newTestEngine(t, `
[soc]
start = 80

[[frame]]
id = 0x4F0
period_ms = 1000
  [[frame.field]]
  bind = "pack.serial"
  byte = 0
  size = 4
`)
	s := newScene()
	serial := uint32(1001)
	send := func(from, to int64) {
		drive(e, s, from, to, 1, func(t int64, s *scene) {
			if (t-epoch)%sec == 0 {
				e.Deliver([]bus.Message{canMsg(t, 0x4F0, byte(serial), byte(serial>>8), byte(serial>>16), byte(serial>>24))})
			}
		})
	}
	s.amps = -90 // 0.5 C of 180 Ah
	send(epoch, epoch+100*sec)
	p := snap(t, e)
	// Coulomb counting (Plett 2015 ch. 2 [memory]): 90 A for 99.95 s out of 180 Ah.
	want := 80 - 100*90*99.95/(180*3600)
	if p.SOC.Source != "counted" || !near(float64(*p.SOC.Pct), want, 1e-9) || p.Serial != "1001" {
		t.Fatalf("SOC %+v serial %q, want counted %.6f %% from 80", p.SOC, p.Serial, want)
	}
	serial = 2002
	send(epoch+100*sec, epoch+101*sec)
	p = snap(t, e)
	if p.Serial != "2002" || float64(p.SOC.AhOut) > 90*1.0/3600+1e-9 {
		t.Errorf("after a serial change: serial %s, Ah out %v (must restart from 0)", p.Serial, p.SOC.AhOut)
	}
	if p.SOC.Source != "uncertain" {
		t.Errorf("a numeric start applied to another pack must be uncertain, got %s", p.SOC.Source)
	}
}

func TestEngineSensorFaultAndStale(t *testing.T) {
	e := newTestEngine(t, "")
	s := newScene()
	s.tempRaw[1] = 0xF0 // 200 °C: outside range [-40, 120] → fault
	s.tempRaw[2] = 0xFF // invalid: no sensor fitted
	drive(e, s, epoch, epoch+2*sec, 8, nil)
	p := snap(t, e)
	if tp := p.Temps[1]; tp.State != "fault" || tp.C != nil {
		t.Errorf("faulted sensor %+v: must show fault, never the value", tp)
	}
	if tp := p.Temps[2]; tp.State != "missing" || tp.C != nil {
		t.Errorf("invalid sensor %+v", tp)
	}
	if len(p.Alarms) != 1 || p.Alarms[0].Level != "fault" || p.Alarms[0].Subject != "temp[2]" || p.Alarms[0].Value != nil {
		t.Errorf("alarms %+v, want one sensor fault without a value", p.Alarms)
	}
	if m := margin(p, "temp_high"); m == nil || float64(*m.Value) != 25 || m.Subject != "sensor 1" {
		t.Errorf("temp_high margin %+v must ignore the faulted sensor", m)
	}
	// Temperatures stop after the reading at 1.5 s: their interval is
	// 500 ms, stale after 1.5 s more.
	s.noTemps = true
	drive(e, s, epoch+2*sec, epoch+2950*ms, 8, nil)
	if p := snap(t, e); p.Temps[0].State != "ok" {
		t.Errorf("1.45 s after the last reading: %s, want ok", p.Temps[0].State)
	}
	drive(e, s, epoch+2950*ms, epoch+3100*ms, 8, nil)
	p = snap(t, e)
	if p.Temps[0].State != "stale" || p.TempStats.Max != nil {
		t.Errorf("1.6 s after the last reading: %s (stats %+v), want stale and no stats", p.Temps[0].State, p.TempStats)
	}
	if m := margin(p, "temp_high"); m == nil || m.State != "nodata" || m.Margin != nil {
		t.Errorf("temp_high margin without fresh readings: %+v", m)
	}
}

func TestEngineChargeTemperatureWindow(t *testing.T) {
	// charge_temp_low_c = 0 in the example applies only while charging.
	e := newTestEngine(t, "")
	s := newScene()
	s.temps = [3]float64{-5, 5, 6}
	drive(e, s, epoch, epoch+5*sec, 8, nil)
	p := snap(t, e)
	if len(p.Alarms) != 0 || margin(p, "charge_temp_low") != nil {
		t.Fatalf("discharging at −5 °C: alarms %+v", p.Alarms)
	}
	s.amps = 20
	drive(e, s, epoch+5*sec, epoch+10*sec, 8, nil)
	p = snap(t, e)
	if len(p.Alarms) != 1 || p.Alarms[0].Limit != "charge_temp_low" || p.Alarms[0].Subject != "sensor 1" {
		t.Errorf("charging at −5 °C: alarms %+v", p.Alarms)
	}
	if m := margin(p, "charge_temp_low"); m == nil || float64(*m.Margin) != -5 || m.State != "trip" {
		t.Errorf("charge_temp_low margin %+v", m)
	}
}

// The same messages give the same state whatever the batching: checks and
// aggregates run on data time, not per batch.
func TestEngineBatchingDeterministic(t *testing.T) {
	run := func(batch int) []byte {
		e := newTestEngine(t, "")
		s := newScene()
		drive(e, s, epoch, epoch+30*sec, batch, func(t int64, s *scene) {
			k := float64((t - epoch) / ms)
			s.cells[3] = 3.7 + 0.1*math.Sin(k/3000)
			s.cells[8] = 3.7 + 0.32*math.Sin(k/2500) // spread past 0.25 for a while
			s.temps[0] = 25 + k/1000
			s.amps = -18 + 30*math.Sin(k/4000)
		})
		b, err := json.Marshal(e.Snapshot(time.Unix(0, 0)))
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	one, many := run(1), run(500)
	if string(one) != string(many) {
		t.Errorf("batch size changed the state:\n%s\n%s", one, many)
	}
	if !strings.Contains(string(one), `"limit":"spread"`) || !strings.Contains(string(one), `"level":"trip"`) {
		t.Errorf("the scenario must trip the spread limit: %s", one)
	}
}

// RFC 8259 §6: NaN and Infinity are not JSON numbers; missing readings must
// marshal as null.
func TestSnapshotNoNaN(t *testing.T) {
	e := newTestEngine(t, "")
	b, err := json.Marshal(e.Snapshot(time.Unix(0, 0)))
	if err != nil {
		t.Fatalf("empty snapshot: %v", err)
	}
	for _, bad := range []string{"NaN", "Inf"} {
		if strings.Contains(string(b), bad) {
			t.Errorf("snapshot contains %s: %s", bad, b)
		}
	}
	var back Snapshot
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	p := back.Packs[0]
	if p.State != "nodata" || p.Current != nil || p.CellStats.Min != nil || p.SOC.Pct != nil || p.Cells[0].State != "missing" {
		t.Errorf("empty pack: %+v", p)
	}
	if !strings.Contains(string(b), `"current_a":null`) {
		t.Error("missing current must be null")
	}
	// Num itself: NaN and ±Inf marshal as null.
	for _, f := range []float64{math.NaN(), math.Inf(1), math.Inf(-1)} {
		if b, _ := json.Marshal(struct{ X Num }{Num(f)}); string(b) != `{"X":null}` {
			t.Errorf("Num(%v) → %s", f, b)
		}
	}
}

func TestEngineSwapAndReset(t *testing.T) {
	e := newTestEngine(t, "")
	s := newScene()
	drive(e, s, epoch, epoch+5*sec, 8, nil)
	before := snap(t, e)

	// A reload that changes a limit keeps readings and counters.
	p2, err := config.Parse("reload.toml", []byte(strings.Replace(mustRead(t, example), "cell_high_v = 4.25", "cell_high_v = 4.20", 1)))
	if err != nil {
		t.Fatal(err)
	}
	m2, err := decode.Compile(p2)
	if err != nil {
		t.Fatal(err)
	}
	e.SetProfileError("winch", "line 3: bad")
	if err := e.Swap("winch", m2); err != nil {
		t.Fatal(err)
	}
	after := snap(t, e)
	if after.ProfileError != "" || after.SOC.AhOut != before.SOC.AhOut || after.CellStats.Reporting != 12 ||
		after.Sources[0].Messages != before.Sources[0].Messages || float64(after.Limits.CellHighV) != 4.20 {
		t.Errorf("swap lost state: before %+v\nafter %+v", before.SOC, after.SOC)
	}
	// Another cell count needs a restart.
	p3, err := config.Parse("reload.toml", []byte(strings.Replace(mustRead(t, example), "cells = 12", "cells = 13", 1)))
	if err != nil {
		t.Fatal(err)
	}
	m3, err := decode.Compile(p3)
	if err != nil {
		t.Fatal(err)
	}
	if err := e.Swap("winch", m3); !errors.Is(err, ErrRestartNeeded) {
		t.Errorf("cell count change: %v, want ErrRestartNeeded", err)
	}
	e.Reset()
	if e.DataTime() != 0 {
		t.Error("reset keeps the data time")
	}
	if p := snap(t, e); p.SOC.AhOut != 0 || p.CellStats.Reporting != 0 || p.Sources[0].Messages != 0 {
		t.Errorf("reset kept state: %+v", p)
	}
}

func mustRead(t *testing.T, path string) string {
	t.Helper()
	s, err := readFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func readFile(path string) (string, error) {
	b, err := os.ReadFile(path)
	return string(b), err
}

type countSink struct{ n int }

func (c *countSink) Write(b []bus.Message) { c.n += len(b) }

func TestEngineRawSinkAndSourceMap(t *testing.T) {
	sink := &countSink{}
	e := NewEngine(Options{RawSink: sink})
	// Engine source 0 is something else; engine source 1 is the pack's "bms".
	if err := e.AddPack("winch", loadMap(t, ""), []int{-1, 0}); err != nil {
		t.Fatal(err)
	}
	if err := e.AddPack("winch", loadMap(t, ""), nil); err == nil {
		t.Error("duplicate pack id accepted")
	}
	if err := e.AddPack("x", loadMap(t, ""), []int{5}); err == nil {
		t.Error("source map past the profile's sources accepted")
	}
	s := newScene()
	msgs := s.frames(epoch, 0)
	for i := range msgs {
		msgs[i].Src = 1
	}
	other := canMsg(epoch, 0x4D0, 0, 10)
	e.Deliver(append(msgs, other)) // Src 0: not the pack's
	e.Status(bus.Status{Src: 1, State: bus.StateConnected, Reason: "listen-only"})
	p := snap(t, e)
	if sink.n != len(msgs)+1 || p.Sources[0].Messages != uint64(len(msgs)) || p.Sources[0].State != "connected" {
		t.Errorf("sink %d, source %+v", sink.n, p.Sources[0])
	}
	if e.Snapshot(time.Unix(0, 0)).Mode != "live" {
		t.Error("default mode must be live")
	}
}
