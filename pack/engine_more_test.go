package pack

import (
	"math"
	"strings"
	"sync"
	"testing"
	"time"

	"packwatch/bus"
	"packwatch/config"
	"packwatch/decode"
)

// replaced loads the example profile with text substitutions.
func replaced(t testing.TB, pairs ...string) *Engine {
	t.Helper()
	text, err := readFile(example)
	if err != nil {
		t.Fatal(err)
	}
	for i := 0; i+1 < len(pairs); i += 2 {
		if !strings.Contains(text, pairs[i]) {
			t.Fatalf("example has no %q", pairs[i])
		}
		text = strings.Replace(text, pairs[i], pairs[i+1], 1)
	}
	p, err := config.Parse("test.toml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	m, err := decode.Compile(p)
	if err != nil {
		t.Fatal(err)
	}
	e := NewEngine(Options{})
	if err := e.AddPack("winch", m, nil); err != nil {
		t.Fatal(err)
	}
	return e
}

// Bus load from frame lengths: 100 standard 8-byte frames/s at 500 kbit/s
// are 2.70 % with worst-case stuffing, 2.22 % without (REFERENCES.md, from
// the formula of Davis et al. 2007 / include/linux/can/length.h).
func TestBusViewLoad(t *testing.T) {
	e := replaced(t, `device = "can0"`, "device = \"can0\"\nbitrate = 500000")
	var batch []bus.Message
	for k := int64(0); k <= 300; k++ {
		batch = append(batch, canMsg(epoch+k*10*ms, 0x4D0, 0, 100, 0x11, 0x94, 0, 1, 0, 0))
	}
	e.Deliver(batch)
	v := e.BusView()
	if len(v.Sources) != 2 {
		t.Fatalf("sources %+v", v.Sources)
	}
	bs := v.Sources[0]
	if bs.LoadPct == nil || !near(float64(*bs.LoadPct), 2.70, 0.005) || !near(float64(*bs.LoadPctUnstuffed), 2.22, 0.005) {
		t.Fatalf("load %v / %v %%, want 2.70 / 2.22", bs.LoadPct, bs.LoadPctUnstuffed)
	}
	if len(bs.IDs) != 1 {
		t.Fatalf("ids %+v", bs.IDs)
	}
	id := bs.IDs[0]
	if id.Hex != "0x4D0" || !id.Known || id.Count != 301 || !near(float64(id.RateHz), 100, 1e-9) || id.Data != "0064119400010000" {
		t.Errorf("id %+v", id)
	}
	got := map[string]string{}
	for _, f := range id.Fields {
		got[f.Bind] = f.Text
		if f.Bind == "pack.current" && (f.Value == nil || float64(*f.Value) != 10) {
			t.Errorf("pack.current field %+v, want 10 A", f)
		}
	}
	if len(got) != 4 || got["bms.state"] != "idle" || got["contactor.main"] != "true" {
		t.Errorf("decoded fields %v", got)
	}
	// A second view a second later: the rate is over that second; an unknown
	// ID shows as unknown; the console source has no bus load.
	batch = batch[:0]
	for k := int64(301); k <= 400; k++ {
		batch = append(batch, canMsg(epoch+k*10*ms, 0x4D0, 0, 100, 0x11, 0x94, 0, 1, 0, 0))
		if k%2 == 0 {
			batch = append(batch, canMsg(epoch+k*10*ms, 0x1ABCDE01, 1, 2))
		}
	}
	e.Deliver(batch)
	v = e.BusView()
	bs = v.Sources[0]
	if len(bs.IDs) != 2 || bs.IDs[1].Hex != "0x1ABCDE01" || bs.IDs[1].Known || !bs.IDs[1].Extended {
		t.Fatalf("ids %+v", bs.IDs)
	}
	if !near(float64(bs.IDs[0].RateHz), 100, 1e-9) || !near(float64(bs.IDs[1].RateHz), 50, 1) {
		t.Errorf("rates %v %v", bs.IDs[0].RateHz, bs.IDs[1].RateHz)
	}
	if v.Sources[1].LoadPct != nil {
		t.Error("a console has no bus load")
	}
}

func TestDiagnose(t *testing.T) {
	can := &config.Source{Name: "bms", Kind: "socketcan", Device: "can0"}
	bench := &config.Source{Name: "bms", Kind: "socketcan", Device: "can0", Mode: "normal"}
	text := &config.Source{Name: "console", Kind: "serial-text"}
	unknown := &decode.SourceCounters{Messages: 30, Unknown: 30, LastT: epoch, IDs: map[uint32]*decode.IDStat{
		0x123: {Count: 20}, 0x456: {Count: 10}, 0x4D0 | 1<<31: {Count: 5, Known: false},
	}}
	tests := []struct {
		name    string
		src     *config.Source
		sc      *decode.SourceCounters
		errRate float64
		want    []string
		not     []string
	}{
		{"listen, nothing", can, &decode.SourceCounters{}, 0,
			[]string{"no messages at all", `set mode = "normal" on a bench`}, nil},
		{"normal mode, nothing", bench, &decode.SourceCounters{}, 0,
			[]string{"no messages at all"}, []string{"acknowledging"}},
		{"none known", can, unknown, 0,
			[]string{"messages but none known: IDs 0x123, 0x456, 0x000004D0", "acknowledging node"}, nil},
		{"error frames", bench, &decode.SourceCounters{ErrorFrames: 40, LastT: epoch}, 12,
			[]string{"error frames rising (12/s)"}, []string{"no messages"}},
		{"console silent", text, &decode.SourceCounters{}, 0, []string{"no lines at all"}, []string{"acknowledging"}},
		{"console unmatched", text, &decode.SourceCounters{Messages: 3, Unknown: 3, LastLine: "hello"}, 0,
			[]string{`none match a pattern; the last was "hello"`}, nil},
		{"stopped", can, &decode.SourceCounters{Messages: 50, LastT: epoch - 7*sec}, 0, []string{"nothing for 7 s"}, nil},
		{"healthy", can, &decode.SourceCounters{Messages: 50, LastT: epoch}, 0, nil, []string{" "}},
	}
	for _, tc := range tests {
		got := diagnose(tc.src, tc.sc, tc.errRate, epoch)
		for _, w := range tc.want {
			if !strings.Contains(got, w) {
				t.Errorf("%s: %q lacks %q", tc.name, got, w)
			}
		}
		for _, n := range tc.not {
			if strings.Contains(got, n) {
				t.Errorf("%s: %q must not contain %q", tc.name, got, n)
			}
		}
		if tc.want == nil && got != "" {
			t.Errorf("%s: diagnosis %q, want none", tc.name, got)
		}
	}
}

func TestSOCStartBMS(t *testing.T) {
	e := replaced(t, "[[source]]", `[[frame]]
id = 0x4F1
period_ms = 1000
  [[frame.field]]
  bind = "pack.soc"
  byte = 0
  size = 1

[[source]]`)
	s := newScene()
	s.amps = -36
	bms := true
	drive(e, s, epoch, epoch+10*sec, 1, func(t int64, s *scene) {
		if bms && (t-epoch)%sec == 0 {
			e.Deliver([]bus.Message{canMsg(t, 0x4F1, 64)})
		}
	})
	p := snap(t, e)
	if p.SOC.Source != "bms" || float64(*p.SOC.Pct) != 64 {
		t.Fatalf("SOC %+v, want 64 %% from the BMS", p.SOC)
	}
	// The BMS value stops (last at 9 s, stale after 3 s): counting goes on
	// from it, from the current reading before it (8.95 s) to the last
	// (28.95 s): 36 A for 20 s of 180 Ah.
	bms = false
	drive(e, s, epoch+10*sec, epoch+29*sec, 8, nil)
	p = snap(t, e)
	want := 64 - 100*36*20/(180*3600.0)
	if p.SOC.Source != "counted" || !near(float64(*p.SOC.Pct), want, 1e-6) {
		t.Errorf("SOC %+v, want counted %.6f", p.SOC, want)
	}
}

func TestSOCStartFull(t *testing.T) {
	e := replaced(t, "[[source]]", "[soc]\nstart = \"full\"\n\n[[source]]")
	s := newScene()
	for i := range s.cells {
		s.cells[i] = 4.19 // near the charge voltage (4.25 − 0.05 = 4.20)
	}
	s.amps = 30
	drive(e, s, epoch, epoch+10*sec, 8, nil)
	if p := snap(t, e); p.SOC.Source != "uncertain" {
		t.Fatalf("before the end of the taper: %+v", p.SOC)
	}
	// C/20 of 180 Ah is 9 A: the taper ends at 5 A.
	s.amps = 5
	drive(e, s, epoch+10*sec, epoch+12*sec, 8, nil)
	p := snap(t, e)
	if p.SOC.Source != "counted" || !near(float64(*p.SOC.Pct), 100, 0.01) {
		t.Errorf("after the taper: %+v, want 100 %% counted", p.SOC)
	}
}

func TestSOCStartRest(t *testing.T) {
	e := newTestEngine(t, "")
	s := newScene()
	for i := range s.cells {
		s.cells[i] = 3.70 // 50 % in the NMC table
	}
	s.amps = 0
	drive(e, s, epoch, epoch+29*60*sec, 4096, nil)
	if p := snap(t, e); p.SOC.Source != "uncertain" {
		t.Fatalf("after 29 min of rest: %+v, want uncertain", p.SOC)
	}
	drive(e, s, epoch+29*60*sec, epoch+31*60*sec, 4096, nil)
	p := snap(t, e)
	if p.SOC.Source != "counted" || !near(float64(*p.SOC.Pct), 50, 1e-6) {
		t.Errorf("after 30 min of rest: %+v, want 50 %% counted", p.SOC)
	}
}

func TestTrendsAndTimeToLimit(t *testing.T) {
	e := replaced(t, "charge_current_a = 60", "charge_current_a = 60\ntemp_rise_c_per_min = 2")
	s := newScene()
	s.amps = 20
	drive(e, s, epoch, epoch+90*sec, 64, func(t int64, s *scene) {
		el := float64(t-epoch) / 1e9
		s.cells[4] = 4.10 + 0.001*el // 1 mV/s toward 4.25 V
		s.temps[0] = 20 + 3*el/60    // 3 °C/min
	})
	p := snap(t, e)
	// At 89.95 s cell 5 is 4.19 V: 0.06 V from the limit at 1 mV/s → 60 s.
	m := margin(p, "cell_high")
	if m == nil || m.ToLimitS == nil || !near(float64(*m.ToLimitS), 60, 3) {
		t.Errorf("cell_high %+v, want about 60 s to the limit", m)
	}
	if m := margin(p, "cell_low"); m == nil || m.ToLimitS != nil {
		t.Errorf("cell_low %+v: not trending toward it", m)
	}
	// Least-squares slope over 60 s of whole-degree readings: about 3 °C/min.
	if r := p.TempStats.RiseCPerMin; r == nil || !near(float64(*r), 3, 0.3) {
		t.Errorf("rise %v, want about 3 °C/min", r)
	}
	found := false
	for _, a := range p.Alarms {
		found = found || (a.Limit == "temp_rise" && a.Subject == "sensor 1")
	}
	if !found {
		t.Errorf("3 °C/min against a 2 °C/min limit must trip: %+v", p.Alarms)
	}
	if p.SOC.ToFullS == nil || p.SOC.ToEmptyS != nil {
		t.Errorf("charging: to full %v, to empty %v", p.SOC.ToFullS, p.SOC.ToEmptyS)
	}
}

func TestFloorTo(t *testing.T) {
	for _, tc := range []struct{ t, step, want int64 }{{1050, 100, 1000}, {-50, 100, -100}, {100, 100, 100}} {
		if got := floorTo(tc.t, tc.step); got != tc.want {
			t.Errorf("floorTo(%d, %d) = %d, want %d", tc.t, tc.step, got, tc.want)
		}
	}
	_ = math.Pi
}

// Sources deliver from their own goroutines while the hub takes snapshots:
// run with -race. Every message must be counted once.
func TestEngineConcurrent(t *testing.T) {
	e := newTestEngine(t, "")
	const perSource, batch = 200, 10
	done := make(chan struct{})
	var wg sync.WaitGroup
	for g := range 2 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			buf := make([]bus.Message, batch)
			for k := range perSource {
				for i := range buf {
					buf[i] = canMsg(epoch+int64(k*batch+i)*ms, uint32(0x100+g), 1, 2, 3)
				}
				e.Deliver(buf)
			}
		}()
	}
	stop := make(chan struct{})
	go func() {
		defer close(done)
		for {
			select {
			case <-stop:
				return
			default:
			}
			e.Snapshot(time.Unix(0, 0))
			e.BusView()
		}
	}()
	wg.Wait()
	close(stop)
	<-done
	if n := snapMessages(e); n != 2*perSource*batch {
		t.Errorf("%d messages counted, want %d", n, 2*perSource*batch)
	}
}

func snapMessages(e *Engine) uint64 {
	return e.Snapshot(time.Unix(0, 0)).Packs[0].Sources[0].Messages
}

// Data time that steps back (a source restarting its clock without a
// Reset) must not freeze the aggregate checks until it catches up.
func TestEngineTimeStepsBack(t *testing.T) {
	e := newTestEngine(t, "")
	s := newScene()
	drive(e, s, epoch+100*sec, epoch+110*sec, 8, nil)
	s.cells[2] = 3.30 // spread 0.41 V past 0.25 V
	drive(e, s, epoch, epoch+5*sec, 8, nil)
	p := snap(t, e)
	found := false
	for _, a := range p.Alarms {
		found = found || a.Limit == "spread"
	}
	if !found {
		t.Errorf("spread past its limit for 5 s after time stepped back: alarms %+v", p.Alarms)
	}
}

func TestRestartReason(t *testing.T) {
	base := func() *config.Profile {
		return &config.Profile{Pack: config.Pack{Cells: 12}, Sources: []config.Source{{Name: "bms", Kind: "socketcan", Device: "can0"}}}
	}
	tests := []struct {
		name    string
		edit    func(p *config.Profile)
		restart bool
	}{
		{"same", func(p *config.Profile) {}, false},
		{"limits only", func(p *config.Profile) { p.Limits.CellHighV = 4.1 }, false},
		{"cell count", func(p *config.Profile) { p.Pack.Cells = 13 }, true},
		{"device", func(p *config.Profile) { p.Sources[0].Device = "can1" }, true},
		{"bitrate", func(p *config.Profile) { p.Sources[0].Bitrate = 250000 }, true},
		{"added source", func(p *config.Profile) { p.Sources = append(p.Sources, config.Source{Name: "x"}) }, true},
	}
	for _, tc := range tests {
		nw := base()
		tc.edit(nw)
		if got := restartReason(base(), nw) != ""; got != tc.restart {
			t.Errorf("%s: restart %v, want %v (%q)", tc.name, got, tc.restart, restartReason(base(), nw))
		}
	}
}
