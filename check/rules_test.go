package check

import (
	"strings"
	"testing"

	"packwatch/pack"
)

func np(v float64) *pack.Num { n := pack.Num(v); return &n }

const t0 = int64(1_780_000_000) * 1e9 // a data time in 2026

// healthyPack is a hand-built snapshot of a resting 4-cell pack with two
// sensors, a fault flag, a BMS state and both contactor bindings.
func healthyPack(msgs uint64) pack.PackSnapshot {
	p := pack.PackSnapshot{ID: "pod", Name: "Test pod", State: "ok", CurrentWord: "rest", Current: np(0.2),
		SOC: pack.SOCSnap{Pct: np(72), Source: "bms"}}
	for i, v := range []float64{3.850, 3.862, 3.841, 3.855} {
		p.Cells = append(p.Cells, pack.CellSnap{N: i + 1, V: np(v), State: "ok", Age: np(0.1)})
	}
	p.Temps = []pack.TempSnap{{N: 1, C: np(21), Role: "cell", State: "ok", Age: np(0.3)},
		{N: 2, C: np(22.5), Role: "busbar", State: "ok", Age: np(0.3)},
		{N: 3, C: np(-30), Role: "ambient", State: "ok", Age: np(0.3)}}
	p.Values = []pack.ValueSnap{
		{Bind: "pack.current", Value: np(0.2), State: "ok"},
		{Bind: "fault.overtemp", Value: np(0), Text: "false", State: "ok"},
		{Bind: "bms.state", Value: np(0), Text: "idle", State: "ok"},
		{Bind: "contactor.main", Value: np(0), Text: "false", State: "ok"},
		{Bind: "contactor.main.command", Value: np(0), Text: "false", State: "ok"},
	}
	p.Sources = []pack.SourceSnap{{Name: "bms", State: "connected", Messages: msgs}}
	return p
}

// testSettings are requirements written out by hand.
func testSettings() Settings {
	return Settings{
		MinSOCPct: Setting{Key: "min_soc_pct", Value: 30}, MinCellMarginV: Setting{Key: "min_cell_margin_v", Value: 0.1},
		CellLowV: 3.0, CellHighV: 4.2, MaxSpreadV: Setting{Key: "max_spread_v", Value: 0.05},
		MaxRestCurrentA: Setting{Key: "max_rest_current_a", Value: 1},
		TempLowC:        Setting{Key: "temp_low_c", Value: 0}, TempHighC: Setting{Key: "temp_high_c", Value: 45},
		ChargeTempLowC: Setting{Key: "charge_temp_low_c", Value: 5}, ChargeTempHighC: Setting{Key: "charge_temp_high_c", Value: 40},
		Rates: []SourceRate{{Source: "bms", Min: Setting{Key: "min_rate_hz.bms", Value: 50}}},
	}
}

// window makes 10 one-second samples of the healthy pack at 100 messages
// per second, each changed by mod(i, pack) when mod is set.
func window(mod func(i int, p *pack.PackSnapshot)) Window {
	start := healthyPack(500)
	w := Window{From: t0, To: t0 + 10e9, Start: &start}
	for i := 1; i <= 10; i++ {
		p := healthyPack(500 + uint64(i)*100)
		if mod != nil {
			mod(i, &p)
		}
		w.Samples = append(w.Samples, Sample{T: t0 + int64(i)*1e9, Pack: p})
	}
	return w
}

func find(rs []RuleResult, id string) *RuleResult {
	for i := range rs {
		if rs[i].ID == id {
			return &rs[i]
		}
	}
	return nil
}

func TestRules(t *testing.T) {
	cases := []struct {
		name   string
		mod    func(i int, p *pack.PackSnapshot)
		rule   string
		want   Status
		reason string // a part of the reason
	}{
		{"reporting pass", nil, "reporting", Pass, "every cell"},
		{"reporting fail stale cell", func(i int, p *pack.PackSnapshot) {
			if i >= 6 {
				p.Cells[2].State, p.Cells[2].Age = "stale", np(float64(i-5))
			}
		}, "reporting", Fail, "cell 3 went stale at +6 s"},
		{"reporting fail sensor fault", func(i int, p *pack.PackSnapshot) {
			if i == 4 {
				p.Temps[1].State, p.Temps[1].C = "fault", nil
			}
		}, "reporting", Fail, "sensor 2 reading implausible"},
		{"reporting fail never reported", func(i int, p *pack.PackSnapshot) {
			p.Cells[3] = pack.CellSnap{N: 4, State: "missing"}
		}, "reporting", Fail, "cell 4 has not reported"},
		{"reporting no data", func(i int, p *pack.PackSnapshot) {
			for k := range p.Cells {
				p.Cells[k] = pack.CellSnap{N: k + 1, State: "missing"}
			}
			for k := range p.Temps {
				p.Temps[k].State, p.Temps[k].C = "missing", nil
			}
		}, "reporting", NoData, "no cell or sensor"},

		// 3.841 V lowest: margin 0.841 V to 3.0 V (arithmetic).
		{"low margin pass", nil, "cell_low_margin", Pass, "0.841 V above cell_low_v"},
		{"low margin fail", func(i int, p *pack.PackSnapshot) {
			if i == 3 {
				p.Cells[1].V = np(3.08) // 0.080 V above 3.000 V, 0.1 V needed
			}
		}, "cell_low_margin", Fail, "cell 2 at 3.080 V at +3 s is only 0.080 V"},
		{"low margin no data", func(i int, p *pack.PackSnapshot) {
			for k := range p.Cells {
				p.Cells[k].State = "stale"
			}
		}, "cell_low_margin", NoData, "no cell voltage"},
		{"low margin no data partial", func(i int, p *pack.PackSnapshot) {
			p.Cells[0] = pack.CellSnap{N: 1, State: "missing"}
		}, "cell_low_margin", NoData, "cell(s) 1 not reporting"},
		{"high margin pass", nil, "cell_high_margin", Pass, "0.338 V"}, // 4.2 − 3.862
		{"high margin fail", func(i int, p *pack.PackSnapshot) {
			p.Cells[3].V = np(4.15)
		}, "cell_high_margin", Fail, "cell 4 at 4.150 V"},

		// spread 3.862 − 3.841 = 0.021 V
		{"spread pass", nil, "spread", Pass, "0.021 V"},
		{"spread fail weak cell", func(i int, p *pack.PackSnapshot) {
			p.Cells[2].V = np(3.78) // 3.862 − 3.780 = 0.082 V
		}, "spread", Fail, "highest cell 2 minus lowest cell 3 was 0.082 V"},
		{"spread no data", func(i int, p *pack.PackSnapshot) {
			for k := 1; k < len(p.Cells); k++ {
				p.Cells[k].State = "stale"
			}
		}, "spread", NoData, "fewer than two"},

		{"soc pass", nil, "soc", Pass, "72 %"},
		{"soc fail", func(i int, p *pack.PackSnapshot) { p.SOC.Pct = np(8) }, "soc", Fail, "8 % at +1 s is below the 30 %"},
		{"soc fail uncertain near minimum", func(i int, p *pack.PackSnapshot) {
			p.SOC = pack.SOCSnap{Pct: np(33), Source: "uncertain"}
		}, "soc", Fail, "only estimated"},
		{"soc pass uncertain well above", func(i int, p *pack.PackSnapshot) {
			p.SOC = pack.SOCSnap{Pct: np(60), Source: "uncertain"}
		}, "soc", Pass, "an estimate"},
		{"soc no data", func(i int, p *pack.PackSnapshot) { p.SOC = pack.SOCSnap{Source: "none"} }, "soc", NoData, "no state of charge"},

		{"temperature pass (ambient ignored)", nil, "temperature", Pass, "stayed inside"},
		{"temperature fail hot", func(i int, p *pack.PackSnapshot) {
			if i > 5 {
				p.Temps[1].C = np(55)
			}
		}, "temperature", Fail, "sensor 2 at 55.0 °C at +6 s is above 45.0 °C"},
		{"temperature fail cold", func(i int, p *pack.PackSnapshot) { p.Temps[0].C = np(-3) }, "temperature", Fail, "below 0.0 °C"},
		{"temperature no data", func(i int, p *pack.PackSnapshot) {
			p.Temps[0].State, p.Temps[1].State = "stale", "stale"
		}, "temperature", NoData, "no pack temperature"},
		{"temperature no data no sensors", func(i int, p *pack.PackSnapshot) { p.Temps = p.Temps[2:] }, "temperature", NoData, "no pack temperature sensor"},
		{"charge window fail while charging", func(i int, p *pack.PackSnapshot) {
			p.CurrentWord, p.Current = "charging", np(20)
			p.Temps[0].C = np(2) // inside 0…45, below the 5 °C charge minimum
		}, "charge_temperature", Fail, "below 5.0 °C"},
		{"charge window pass while charging", func(i int, p *pack.PackSnapshot) {
			p.CurrentWord, p.Current = "charging", np(20)
		}, "charge_temperature", Pass, "while charging"},

		{"charge window no data", func(i int, p *pack.PackSnapshot) {
			p.CurrentWord, p.Current = "charging", np(20)
			p.Temps[0].State, p.Temps[1].State = "stale", "stale"
		}, "charge_temperature", NoData, "no pack temperature"},

		{"rest current pass", nil, "rest_current", Pass, "at rest"},
		{"rest current fail discharging", func(i int, p *pack.PackSnapshot) {
			if i == 7 {
				p.Current = np(-12.5)
			}
		}, "rest_current", Fail, "discharging at 12.5 A at +7 s"},
		{"rest current no data", func(i int, p *pack.PackSnapshot) { p.Current = nil }, "rest_current", NoData, "no fresh pack current"},
		{"rest current unbound", func(i int, p *pack.PackSnapshot) { p.Current, p.Values = nil, p.Values[1:] }, "rest_current", NoData, "does not bind pack.current"},

		{"fault flags pass", nil, "fault_flags", Pass, "fault.overtemp, bms.state"},
		{"fault flag set", func(i int, p *pack.PackSnapshot) {
			if i == 2 {
				p.Values[1].Value, p.Values[1].Text = np(1), "true"
			}
		}, "fault_flags", Fail, "fault.overtemp at +2 s"},
		{"bms state fault", func(i int, p *pack.PackSnapshot) { p.Values[2].Text = "fault" }, "fault_flags", Fail, `bms.state "fault"`},
		{"fault flag no data", func(i int, p *pack.PackSnapshot) { p.Values[1].State, p.Values[1].Value = "missing", nil }, "fault_flags", NoData, "fault.overtemp missing"},
		{"fault flags not bound", func(i int, p *pack.PackSnapshot) { p.Values = p.Values[3:] }, "fault_flags", NotChecked, "binds no fault"},

		{"contactor pass", nil, "contactor", Pass, "followed"},
		{"contactor one-sample transition passes", func(i int, p *pack.PackSnapshot) {
			if i == 4 {
				p.Values[4].Value = np(1) // commanded closed, feedback follows next sample
			}
			if i > 4 {
				p.Values[3].Value, p.Values[4].Value = np(1), np(1)
			}
		}, "contactor", Pass, "followed"},
		{"contactor stuck", func(i int, p *pack.PackSnapshot) {
			if i >= 4 {
				p.Values[4].Value = np(1)
			}
		}, "contactor", Fail, "reads open while commanded closed"},
		{"contactor mismatch at the end", func(i int, p *pack.PackSnapshot) {
			if i == 10 {
				p.Values[4].Value = np(1)
			}
		}, "contactor", Fail, "commanded closed"},
		{"contactor no data", func(i int, p *pack.PackSnapshot) { p.Values[3].State, p.Values[3].Value = "stale", nil }, "contactor", NoData, "contactor.main is stale"},
		{"contactor not bound", func(i int, p *pack.PackSnapshot) { p.Values = p.Values[:4] }, "contactor", NotChecked, "does not bind both"},

		{"trips pass", nil, "trips", Pass, "no limit"},
		{"trip raised in the window", func(i int, p *pack.PackSnapshot) {
			p.Alarms = []pack.AlarmSnap{{Label: "Temperature rise", Subject: "sensor 2", Level: "trip", Since: pack.Num(float64(t0)/1e9 + 3)}}
		}, "trips", Fail, "Temperature rise (sensor 2)"},
		{"old cleared trip ignored", func(i int, p *pack.PackSnapshot) {
			p.Alarms = []pack.AlarmSnap{{Label: "Cell low", Level: "trip", Since: pack.Num(float64(t0)/1e9 - 600)}}
		}, "trips", Pass, "no limit"},

		{"rate pass", nil, "rate.bms", Pass, "kept"}, // 1000 messages / 10 s = 100 Hz
		{"rate no data short window", nil, "rate.bms", NoData, "shorter than one second"},
		{"rate fail silent", func(i int, p *pack.PackSnapshot) {
			p.Sources[0].Messages, p.Sources[0].Diagnosis = 500, "no message for 10 s"
		}, "rate.bms", Fail, "sent nothing during the check (no message for 10 s)"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			w := window(c.mod)
			if c.name == "rate no data short window" {
				w.To = w.From + 5e8
			}
			rs := Evaluate(w, testSettings())
			r := find(rs, c.rule)
			if r == nil {
				t.Fatalf("no rule %s in %+v", c.rule, rs)
			}
			if r.Status != c.want || !strings.Contains(r.Reason, c.reason) {
				t.Errorf("%s: got %s %q (measured %q), want %s containing %q", c.rule, r.Status, r.Reason, r.Measured, c.want, c.reason)
			}
			if got := Verdict(rs); (c.want == Fail || c.want == NoData) && got != VerdictNoGo {
				t.Errorf("verdict %s with %s %s", got, c.rule, r.Status)
			}
		})
	}
}

func TestHealthyWindowIsGo(t *testing.T) {
	rs := Evaluate(window(nil), testSettings())
	for _, r := range rs {
		if r.Status != Pass {
			t.Errorf("%s: %s %s", r.ID, r.Status, r.Reason)
		}
	}
	if v := Verdict(rs); v != VerdictGo {
		t.Fatalf("verdict %s", v)
	}
	if find(rs, "charge_temperature") != nil {
		t.Error("charge window listed although the pack did not charge")
	}
	// 1000 messages in 10 s of data time: 100 Hz (arithmetic).
	if r := find(rs, "rate.bms"); r.Value == nil || *r.Value != 100 {
		t.Errorf("rate %v, want 100", r.Value)
	}
}

func TestNoSamples(t *testing.T) {
	rs := Evaluate(Window{From: t0, To: t0 + 10e9}, testSettings())
	for _, r := range rs {
		if r.Status != NoData {
			t.Errorf("%s: %s with no samples", r.ID, r.Status)
		}
	}
	if Verdict(rs) != VerdictNoGo {
		t.Error("an empty window is a go")
	}
}

func TestManualAndVerdict(t *testing.T) {
	items := []string{"connector latched and locked", "vent clear"}
	auto := Evaluate(window(nil), testSettings())
	m := ManualRules(items, []bool{true}, "A. Operator")
	if m[0].Status != Pass || m[0].Measured != "confirmed by A. Operator" || m[1].Status != NoData {
		t.Fatalf("manual rules %+v", m)
	}
	if Verdict(append(auto, m...)) != VerdictNoGo {
		t.Error("an unconfirmed item is a go")
	}
	m = ManualRules(items, []bool{true, true}, "")
	if Verdict(append(auto, m...)) != VerdictGo {
		t.Error("all confirmed and passing is not a go")
	}
	if Verdict(nil) != VerdictNoGo {
		t.Error("no rules is a go")
	}
	s := Sorted([]RuleResult{{ID: "a", Status: Pass}, {ID: "b", Status: NoData}, {ID: "c", Status: Fail}, {ID: "d", Status: NotChecked}})
	if s[0].ID != "c" || s[1].ID != "b" || s[2].ID != "d" || s[3].ID != "a" {
		t.Errorf("sorted %v", s)
	}
}
