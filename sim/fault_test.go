package sim

import (
	"context"
	"fmt"
	"math"
	"testing"
	"time"

	"packwatch/decode"
)

func TestParseFault(t *testing.T) {
	good := []struct {
		in   string
		want Fault
	}{
		{"weak-cell:7", Fault{Kind: FaultWeakCell, N: 7}},
		{"sensor-stop:2@5m", Fault{Kind: FaultSensorStop, N: 2, After: 5 * time.Minute}},
		{"silent:console@90s", Fault{Kind: FaultSilent, Source: "console", After: 90 * time.Second}},
		{"fault-flag", Fault{Kind: FaultFlag}},
		{"low-soc", Fault{Kind: FaultLowSOC}},
		{"hot-sensor", Fault{Kind: FaultHotSensor}},
		{"garbage@1h", Fault{Kind: FaultGarbage, After: time.Hour}},
	}
	for _, c := range good {
		got, err := ParseFault(c.in)
		if err != nil || got != c.want {
			t.Errorf("ParseFault(%q) = %+v, %v; want %+v", c.in, got, err, c.want)
		}
		if back, err := ParseFault(got.String()); err != nil || back != got {
			t.Errorf("%q does not read back: %+v %v", got.String(), back, err)
		}
	}
	for _, bad := range []string{"", "melt", "weak-cell:x", "weak-cell:0", "fault-flag:3", "silent:", "low-soc@soon", "garbage@-1s"} {
		if _, err := ParseFault(bad); err == nil {
			t.Errorf("ParseFault(%q) accepted", bad)
		}
	}
}

func TestFaultNumbersChecked(t *testing.T) {
	dm := loadMap(t, buoyProfile)
	for _, f := range []Fault{{Kind: FaultWeakCell, N: 13}, {Kind: FaultCellHigh, N: 20}, {Kind: FaultSensorStop, N: 4}, {Kind: FaultSilent, Source: "radio"}} {
		if _, err := New(dm, Options{Faults: []Fault{f}, Start: t0}); err == nil {
			t.Errorf("fault %s accepted for a 12-cell, 3-sensor pack", f)
		}
	}
}

// runFor runs the buoy story at full speed for d of simulated time.
func runFor(t *testing.T, d time.Duration, faults ...string) (*Sim, *decodeSink) {
	t.Helper()
	var fs []Fault
	for _, s := range faults {
		f, err := ParseFault(s)
		if err != nil {
			t.Fatal(err)
		}
		fs = append(fs, f)
	}
	s, dm := newBuoySim(t, Options{Speed: SpeedMax, For: d, Faults: fs, Seed: 11})
	sink := newDecodeSink(dm)
	if err := s.Run(context.Background(), sink); err != nil {
		t.Fatal(err)
	}
	return s, sink
}

func cellVolts(t *testing.T, d *decodeSink) []float64 {
	var out []float64
	for k := 1; k <= 12; k++ {
		v, _ := d.value(t, fmt.Sprintf("cell[%d].voltage", k))
		out = append(out, v)
	}
	return out
}

// Each fault shows in the decoded data the way the pre-flight check and the
// dashboard will meet it.
func TestFaultsShowInDecodedData(t *testing.T) {
	t.Run("healthy", func(t *testing.T) {
		_, d := runFor(t, 2*time.Minute)
		v := cellVolts(t, d)
		lo, hi := slicesMinMax(v)
		if hi-lo > 0.02 { // cell 7's 4 % less capacity shows as about 12 mV at 30 %
			t.Errorf("healthy pack at rest spreads %.3f V", hi-lo)
		}
		for k := 1; k <= 3; k++ {
			if temp, fl := d.value(t, fmt.Sprintf("temp[%d]", k)); fl != decode.FlagOK || temp > 20 {
				t.Errorf("temp %d = %g (%v)", k, temp, fl)
			}
		}
	})
	t.Run("weak-cell", func(t *testing.T) {
		_, d := runFor(t, 2*time.Minute, "weak-cell:4")
		v := cellVolts(t, d)
		for k := range v {
			if k != 3 && v[k]-v[3] < 0.02 {
				t.Errorf("weak cell 4 at %.3f V, cell %d at %.3f V: want the weak one clearly lower", v[3], k+1, v[k])
			}
		}
	})
	t.Run("low-soc", func(t *testing.T) {
		s, d := runFor(t, 2*time.Minute, "low-soc")
		st := s.State()
		for k, z := range st.SOC {
			if k == 6 { // cell 7, smaller and balanced at the top, stands lower
				continue
			}
			if math.Abs(z-lowSOCStart) > 0.01 {
				t.Errorf("cell %d SOC %.3f, want about %.2f", k+1, z, lowSOCStart)
			}
		}
		if v := cellVolts(t, d); v[0] > 3.55 {
			t.Errorf("cell 1 at %.3f V for 8 %% SOC", v[0])
		}
	})
	t.Run("hot-sensor", func(t *testing.T) {
		_, d := runFor(t, time.Minute, "hot-sensor")
		if temp, _ := d.value(t, "temp[3]"); temp < 50 { // limit 50 °C in the example profile
			t.Errorf("busbar sensor reads %g °C, want past the 50 °C limit", temp)
		}
		if temp, _ := d.value(t, "temp[1]"); temp > 20 {
			t.Errorf("sensor 1 reads %g °C", temp)
		}
	})
	t.Run("hot-sensor-later", func(t *testing.T) {
		_, d := runFor(t, 12*time.Minute, "hot-sensor:1@1m")
		if temp, _ := d.value(t, "temp[1]"); temp < 50 {
			t.Errorf("sensor 1 reads %g °C 11 min after it began to heat", temp)
		}
	})
	t.Run("sensor-stop", func(t *testing.T) {
		_, d := runFor(t, time.Minute, "sensor-stop:2@10s")
		if _, fl := d.value(t, "temp[2]"); fl != decode.FlagInvalid {
			t.Errorf("stopped sensor decodes with flag %v, want invalid", fl)
		}
		if _, fl := d.value(t, "temp[1]"); fl != decode.FlagOK {
			t.Errorf("sensor 1 flag %v", fl)
		}
	})
	t.Run("silent", func(t *testing.T) {
		_, d := runFor(t, 3*time.Minute, "silent:console@1m")
		if n := d.bySrc[1]; n < 700 || n > 740 {
			t.Errorf("%d console lines; want 1 min worth (720) before it went silent", n)
		}
		if n := d.bySrc[0]; n < 5700 {
			t.Errorf("only %d frames from the BMS", n)
		}
	})
	t.Run("contactor-stuck", func(t *testing.T) {
		// rest 10 min with the contactor open; the charge closes it; the
		// feedback stays open
		_, d := runFor(t, 15*time.Minute, "contactor-stuck")
		c, _ := d.value(t, "contactor.main")
		st, _ := d.value(t, "bms.state")
		i, _ := d.value(t, "pack.current")
		if c != 0 || st != 1 || math.Abs(i-20) > 0.1 {
			t.Errorf("contactor %g, state %g, current %g; want open feedback while charging at 20 A", c, st, i)
		}
	})
	t.Run("garbage", func(t *testing.T) {
		_, d := runFor(t, time.Minute, "garbage")
		bms, con := d.v.Src[0], d.v.Src[1]
		if bms.Unknown < 100 || bms.DecodeErrors < 50 || con.Unknown < 50 {
			t.Errorf("garbage: bms %d unknown %d decode errors, console %d unknown", bms.Unknown, bms.DecodeErrors, con.Unknown)
		}
		if v := cellVolts(t, d); v[0] < 3.5 || v[0] > 3.8 {
			t.Errorf("good data around the garbage: cell 1 at %g V", v[0])
		}
	})
	t.Run("fault-flag", func(t *testing.T) {
		_, d := runFor(t, time.Minute, "fault-flag@30s")
		if st, _ := d.value(t, "bms.state"); st != 3 {
			t.Errorf("bms.state %g, want 3 (fault)", st)
		}
	})
	t.Run("cell-high", func(t *testing.T) {
		_, d := runFor(t, 31*time.Minute, "cell-high:2@1m")
		v := cellVolts(t, d)
		if diff := v[1] - v[0]; math.Abs(diff-0.3) > 0.03 {
			t.Errorf("cell 2 is %.3f V above cell 1 after 30 min of drift; want 0.30", diff)
		}
	})
}

func slicesMinMax(v []float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, x := range v {
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	return lo, hi
}
