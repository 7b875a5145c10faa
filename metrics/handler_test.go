package metrics

import (
	"encoding/json"
	"math"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"packwatch/bus"
	"packwatch/pack"
)

const promUA = "Prometheus/2.42.0"

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol }

// apiState is the snapshot as /api/state serves it: its JSON, read back
// without the Go types, so the check goes through the wire format.
func apiState(t *testing.T, s *pack.Snapshot) map[string]any {
	t.Helper()
	b, err := json.Marshal(s)
	if err != nil {
		t.Fatalf("marshal snapshot: %v", err)
	}
	var out map[string]any
	if err := json.Unmarshal(b, &out); err != nil {
		t.Fatal(err)
	}
	return out
}

func obj(v any) map[string]any { m, _ := v.(map[string]any); return m }
func arr(v any) []any          { a, _ := v.([]any); return a }
func str(v any) string         { s, _ := v.(string); return s }

// numOf gives a JSON number; ok is false for null or absent.
func numOf(v any) (float64, bool) {
	f, ok := v.(float64)
	return f, ok
}

func itoa(v any) string { f, _ := numOf(v); return strconv.Itoa(int(f)) }

// twoPackScene drives packs A and B into a state with fresh, stale and
// missing readings and known source states, and returns the handler and the
// last snapshot it observed.
func twoPackScene(t *testing.T) (*Handler, *pack.Snapshot) {
	h := NewHandler(Options{Version: "test"})
	r := newRig(t, h.Observe)
	r.a.cells[6] = 3.650 // A: cell 7 lowest
	r.b.tempRaw[1] = 0xFF
	r.e.Status(bus.Status{Src: 0, State: bus.StateConnected})
	r.e.Status(bus.Status{Src: 1, State: bus.StateDisconnected, Reason: "unplugged"})
	r.e.Status(bus.Status{Src: 2, State: bus.StateConnected})
	r.run(10*time.Second, nil)
	// B's temperature frame stops: after 3 × its 500 ms its readings are
	// stale and must leave /metrics.
	r.b.noTemps = true
	r.run(3*time.Second, nil)
	return h, r.last
}

// TestExpositionMatchesState parses /metrics with the Prometheus text parser
// and checks every series against /api/state's JSON of the snapshot the
// handler exposed: values present where the reading is fresh, absent where
// it is stale, missing or faulty.
func TestExpositionMatchesState(t *testing.T) {
	h, snap := twoPackScene(t)
	x := scrape(t, h, promUA)
	st := apiState(t, snap)

	if v, ok := x.find(t, "packwatch_snapshots_total"); !ok || v != st["seq"].(float64) {
		t.Errorf("snapshots_total %v, want seq %v", v, st["seq"])
	}
	if v, ok := x.find(t, "packwatch_data_time_seconds"); !ok || !near(v, st["data_t"].(float64), 1e-3) {
		t.Errorf("data_time_seconds %v, want %v", v, st["data_t"])
	}
	if _, ok := x.find(t, "packwatch_info", "mode", "live", "version", "test"); !ok {
		t.Errorf("packwatch_info{mode=live,version=test} missing")
	}

	packs := arr(st["packs"])
	if len(packs) != 2 {
		t.Fatalf("%d packs in /api/state", len(packs))
	}
	stale := 0
	for _, pv := range packs {
		p := obj(pv)
		id := str(p["id"])
		if _, ok := x.find(t, "packwatch_pack_info", "pack", id, "name", str(p["name"])); !ok {
			t.Errorf("%s: pack_info missing", id)
		}
		checkStateSet(t, x, "packwatch_pack_state", str(p["state"]), "pack", id)

		fresh := 0
		for _, cv := range arr(p["cells"]) {
			c := obj(cv)
			n := itoa(c["n"])
			v, ok := x.find(t, "packwatch_cell_voltage_volts", "pack", id, "cell", n)
			want, has := numOf(c["v"])
			if s := str(c["state"]); s != "ok" && s != "warn" && s != "trip" {
				has = false
			}
			if has != ok || (ok && v != want) {
				t.Errorf("%s cell %s: /metrics %v (%v), /api/state %v state %s", id, n, v, ok, c["v"], c["state"])
			}
			if has {
				fresh++
			}
		}
		if got := x.series("packwatch_cell_voltage_volts", "pack", id); got != fresh || fresh != 12 {
			t.Errorf("%s: %d cell series, %d fresh cells, want 12", id, got, fresh)
		}
		if v, _ := x.find(t, "packwatch_cells_reporting", "pack", id); v != obj(p["cell_stats"])["reporting"].(float64) {
			t.Errorf("%s: cells_reporting %v", id, v)
		}

		for _, tv := range arr(p["temps"]) {
			tp := obj(tv)
			n := itoa(tp["n"])
			v, ok := x.find(t, "packwatch_temperature_celsius", "pack", id, "sensor", n, "role", str(tp["role"]))
			want, has := numOf(tp["c"])
			s := str(tp["state"])
			if s == "stale" && has {
				stale++ // a value /api/state still shows, which must not be exposed
			}
			if s != "ok" && s != "warn" && s != "trip" {
				has = false
			}
			if has != ok || (ok && v != want) {
				t.Errorf("%s sensor %s: /metrics %v (%v), /api/state %v state %s", id, n, v, ok, tp["c"], s)
			}
		}

		for name, key := range map[string]string{
			"packwatch_pack_current_amperes": "current_a",
			"packwatch_pack_voltage_volts":   "voltage_v",
			"packwatch_pack_power_watts":     "power_w",
		} {
			v, ok := x.find(t, name, "pack", id)
			want, has := numOf(p[key])
			if has != ok || (ok && v != want) {
				t.Errorf("%s %s: /metrics %v (%v), /api/state %v", id, name, v, ok, p[key])
			}
		}

		soc := obj(p["soc"])
		_, hasCurrent := numOf(p["current_a"])
		if src := str(soc["source"]); !hasCurrent && (src == "counted" || src == "uncertain") {
			soc["pct"] = nil // counted without a current: not exposed
		}
		if pct, has := numOf(soc["pct"]); has {
			v, ok := x.find(t, "packwatch_state_of_charge_ratio", "pack", id)
			if !ok || !near(v, pct/100, 1e-12) || v < 0 || v > 1 {
				t.Errorf("%s: state of charge ratio %v, want %v / 100 within 0..1", id, v, pct)
			}
		} else if _, ok := x.find(t, "packwatch_state_of_charge_ratio", "pack", id); ok {
			t.Errorf("%s: state of charge exposed while /api/state has null", id)
		}
		checkStateSet(t, x, "packwatch_state_of_charge_basis", str(soc["source"]), "pack", id)
		// 1 Ah = 3600 C, 1 Wh = 3600 J (SI definitions of the ampere-hour and watt-hour).
		for _, c := range []struct{ name, dir, key string }{
			{"packwatch_charge_coulombs_total", "in", "ah_in"},
			{"packwatch_charge_coulombs_total", "out", "ah_out"},
			{"packwatch_energy_joules_total", "in", "wh_in"},
			{"packwatch_energy_joules_total", "out", "wh_out"},
		} {
			want, _ := numOf(soc[c.key])
			if v, ok := x.find(t, c.name, "pack", id, "direction", c.dir); !ok || !near(v, 3600*want, 1e-6) {
				t.Errorf("%s %s{%s}: %v, want 3600 × %v", id, c.name, c.dir, v, want)
			}
		}

		margins := arr(p["margins"])
		if len(margins) < 7 {
			t.Errorf("%s: %d margins in /api/state, want the example's 7 or more", id, len(margins))
		}
		for _, mv := range margins {
			m := obj(mv)
			lim := str(m["limit"])
			u, known := limitUnits[str(m["unit"])]
			if !known {
				t.Errorf("%s %s: unit %q has no metric name", id, lim, m["unit"])
				continue
			}
			v, ok := x.find(t, "packwatch_limit_margin_"+u.suffix, "pack", id, "limit", lim)
			want, has := numOf(m["margin"])
			if has != ok || (ok && !near(v, u.factor*want, 1e-12)) {
				t.Errorf("%s %s margin: /metrics %v (%v), /api/state %v", id, lim, v, ok, m["margin"])
			}
			b, _ := numOf(m["bound"])
			if v, ok := x.find(t, "packwatch_limit_bound_"+u.suffix, "pack", id, "limit", lim); !ok || !near(v, u.factor*b, 1e-12) {
				t.Errorf("%s %s bound %v, want %v", id, lim, v, b)
			}
			checkStateSet(t, x, "packwatch_limit_state", str(m["state"]), "pack", id, "limit", lim)
		}
		if got := x.series("packwatch_limit_state", "pack", id, "state", "ok") +
			x.series("packwatch_limit_state", "pack", id, "state", "nodata"); got != 2*len(margins) {
			t.Errorf("%s: limit_state covers %d of %d limits", id, got/2, len(margins))
		}

		for _, sv := range arr(p["sources"]) {
			s := obj(sv)
			name := str(s["name"])
			for metric, key := range map[string]string{
				"packwatch_source_messages_total":      "messages",
				"packwatch_source_decode_errors_total": "decode_errors",
				"packwatch_source_unknown_ids_total":   "unknown",
				"packwatch_source_gaps_total":          "gaps",
			} {
				want, _ := numOf(s[key])
				if v, ok := x.find(t, metric, "pack", id, "source", name); !ok || v != want {
					t.Errorf("%s source %s %s: %v, want %v", id, name, metric, v, want)
				}
			}
			v, ok := x.find(t, "packwatch_source_last_message_age_seconds", "pack", id, "source", name)
			want, has := numOf(s["age_s"])
			if has != ok || (ok && v != want) {
				t.Errorf("%s source %s age: %v (%v), /api/state %v", id, name, v, ok, s["age_s"])
			}
			c, ok := x.find(t, "packwatch_source_connected", "pack", id, "source", name)
			switch state := str(s["state"]); state {
			case "unknown":
				if ok {
					t.Errorf("%s source %s: connected exposed for an unknown state", id, name)
				}
			default:
				if !ok || c != b2f(state == "connected") {
					t.Errorf("%s source %s: connected %v (%v), state %s", id, name, c, ok, state)
				}
			}
		}
	}
	// The scene has stale readings (B's temperatures) and a missing one (B's
	// sensor 2): the checks above covered them only if they are there.
	if stale != 2 {
		t.Errorf("%d stale temperatures in /api/state, want B's sensors 1 and 3", stale)
	}
	if n := x.series("packwatch_temperature_celsius", "pack", packB); n != 0 {
		t.Errorf("B: %d temperature series, want none (stale or missing)", n)
	}
	if n := x.series("packwatch_temperature_celsius", "pack", packA); n != 3 {
		t.Errorf("A: %d temperature series, want 3", n)
	}
	// A discharges at 18 A and B charges at 20 A (positive = charging).
	if v, _ := x.find(t, "packwatch_pack_current_amperes", "pack", packA); v != -18 {
		t.Errorf("A current %v, want -18", v)
	}
	if v, _ := x.find(t, "packwatch_pack_current_amperes", "pack", packB); v != 20 {
		t.Errorf("B current %v, want 20", v)
	}
	// Cell 7 of A is 3.650 V, 0.650 V above the 3.00 V low limit.
	if v, _ := x.find(t, "packwatch_limit_margin_volts", "pack", packA, "limit", "cell_low"); !near(v, 0.650, 1e-9) {
		t.Errorf("A cell_low margin %v, want 0.650", v)
	}
}

// checkStateSet checks that a state set has exactly one series at 1, the
// one for want.
func checkStateSet(t *testing.T, x exposition, name, want string, labels ...string) {
	t.Helper()
	on := 0
	for _, m := range x[name].GetMetric() {
		l := labelsOf(m)
		match := true
		for i := 0; i+1 < len(labels); i += 2 {
			if l[labels[i]] != labels[i+1] {
				match = false
			}
		}
		if !match {
			continue
		}
		v := sampleValue(m)
		var label string
		for k, lv := range l {
			if k != "pack" && k != "limit" && k != "source" {
				label = lv
			}
		}
		if v == 1 {
			on++
			if label != want {
				t.Errorf("%s%v: %s is 1, want %s", name, labels, label, want)
			}
		} else if v != 0 {
			t.Errorf("%s%v: %s is %v, want 0 or 1", name, labels, label, v)
		}
	}
	if on != 1 {
		t.Errorf("%s%v: %d series at 1, want exactly one (%s)", name, labels, on, want)
	}
}

// TestNaming checks the exposition against prometheus.io "Metric and label
// naming" and "Exposition formats" (REFERENCES.md, read): names match
// [a-zA-Z_:][a-zA-Z0-9_:]*, counters and only counters end in _total, every
// family has HELP, values are in base units (the name ends in its unit), and
// the label names are the documented ones.
func TestNaming(t *testing.T) {
	h, _ := twoPackScene(t)
	x := scrape(t, h, promUA)
	nameRE := regexp.MustCompile(`^[a-zA-Z_:][a-zA-Z0-9_:]*$`)
	units := []string{"_volts", "_amperes", "_celsius", "_watts", "_ratio", "_seconds", "_celsius_per_second"}
	// Dimensionless gauges: 0/1 states and flags, info series, counts.
	unitless := regexp.MustCompile(`_(info|state|basis|connected|balancing|reporting|active|unacknowledged)$`)
	labelRE := regexp.MustCompile(`^(pack|cell|sensor|source|limit|state|role|basis|direction|level|kind|name|serial|mode|version)$`)
	if len(x) < 30 {
		t.Fatalf("only %d families: %s", len(x), x.names())
	}
	for name, f := range x {
		if !nameRE.MatchString(name) || !strings.HasPrefix(name, "packwatch_") {
			t.Errorf("name %q", name)
		}
		if f.GetHelp() == "" {
			t.Errorf("%s: no HELP", name)
		}
		isCounter := f.GetType().String() == "COUNTER"
		if isCounter != strings.HasSuffix(name, "_total") {
			t.Errorf("%s: type %s; counters and only counters end in _total", name, f.GetType())
		}
		base := strings.TrimSuffix(name, "_total")
		hasUnit := false
		for _, u := range units {
			hasUnit = hasUnit || strings.HasSuffix(base, u)
		}
		for _, bad := range []string{"milli", "percent", "_ah", "_wh", "kelvin", "_mv"} {
			if strings.Contains(name, bad) {
				t.Errorf("%s: not a base unit", name)
			}
		}
		if !hasUnit && !unitless.MatchString(base) && !isCounter {
			t.Errorf("%s: a gauge without a unit suffix", name)
		}
		for _, m := range f.GetMetric() {
			for _, l := range m.GetLabel() {
				if !labelRE.MatchString(l.GetName()) {
					t.Errorf("%s: label %q", name, l.GetName())
				}
			}
		}
	}
}

// TestGatherConsistent checks that the registry finds nothing inconsistent
// in a scrape (duplicate series, label counts), which promhttp would
// otherwise drop silently.
func TestGatherConsistent(t *testing.T) {
	h, _ := twoPackScene(t)
	if _, err := h.registry(h.take("test")).Gather(); err != nil {
		t.Fatalf("gather: %v", err)
	}
}

func TestBeforeAnySnapshot(t *testing.T) {
	h := NewHandler(Options{})
	x := scrape(t, h, promUA)
	if len(x) != 1 || x["packwatch_info"] == nil {
		t.Errorf("families %s, want packwatch_info alone", x.names())
	}
}

// A source that goes silent: every value it fed leaves /metrics, while its
// counters stay and its age grows; the other pack is untouched.
func TestSilentSourceDropsValues(t *testing.T) {
	h := NewHandler(Options{})
	r := newRig(t, h.Observe)
	r.run(5*time.Second, nil)
	before := scrape(t, h, promUA)
	r.b.silent = true
	// 3 s: past 3 × every interval of B's frames (cells 400 ms, current
	// 50 ms, temperatures 500 ms).
	r.run(3*time.Second, nil)
	x := scrape(t, h, promUA)
	for _, name := range []string{
		"packwatch_cell_voltage_volts", "packwatch_temperature_celsius", "packwatch_pack_current_amperes",
		"packwatch_pack_voltage_volts", "packwatch_pack_power_watts", "packwatch_state_of_charge_ratio",
		"packwatch_limit_margin_volts", "packwatch_limit_margin_celsius", "packwatch_limit_margin_amperes",
	} {
		if n := before.series(name, "pack", packB); n == 0 {
			t.Errorf("before: no %s for B", name)
		}
		if n := x.series(name, "pack", packB); n != 0 {
			t.Errorf("B silent: %d %s series, want none", n, name)
		}
		if n, m := x.series(name, "pack", packA), before.series(name, "pack", packA); n != m {
			t.Errorf("A: %d %s series, %d before", n, name, m)
		}
	}
	msgs, _ := before.find(t, "packwatch_source_messages_total", "pack", packB, "source", "bms")
	if v, ok := x.find(t, "packwatch_source_messages_total", "pack", packB, "source", "bms"); !ok || v != msgs || v == 0 {
		t.Errorf("B messages %v (%v), want the %v from before", v, ok, msgs)
	}
	// Last message at 4.95 s, data time now 7.95 s (A keeps sending).
	if v, ok := x.find(t, "packwatch_source_last_message_age_seconds", "pack", packB, "source", "bms"); !ok || !near(v, 3.0, 1e-9) {
		t.Errorf("B source age %v (%v), want 3 s", v, ok)
	}
	checkStateSet(t, x, "packwatch_pack_state", "nodata", "pack", packB)
}
