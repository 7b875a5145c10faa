package record

import (
	"math"
	"reflect"
	"testing"
)

func TestDecimator(t *testing.T) {
	type add struct {
		bind int
		t    int64
		v    float64
	}
	type out struct {
		sec  int64
		rows []StatRow
	}
	tests := []struct {
		name string
		adds []add
		want []out
	}{
		{"one second then the next", []add{{0, 100e6, 3.7}, {0, 500e6, 3.9}, {1, 600e6, -12}, {0, 900e6, 3.8}, {0, 1200e6, 4.0}},
			[]out{{0, []StatRow{{"cell.max", 3.7, 3.9, 3.8}, {"pack.current", -12, -12, -12}}}, {1, []StatRow{{"cell.max", 4, 4, 4}}}}},
		{"quiet seconds emit nothing", []add{{1, 5e9, 1}, {1, 9e9 + 1, 2}},
			[]out{{5, []StatRow{{"pack.current", 1, 1, 1}}}, {9, []StatRow{{"pack.current", 2, 2, 2}}}}},
		{"before the epoch: floor", []add{{0, -1, 1}, {0, -1e9, 2}, {0, 0, 3}},
			[]out{{-1, []StatRow{{"cell.max", 1, 2, 2}}}, {0, []StatRow{{"cell.max", 3, 3, 3}}}}},
		{"late value counts in the current second", []add{{0, 2e9, 5}, {0, 1e9, 7}},
			[]out{{2, []StatRow{{"cell.max", 5, 7, 7}}}}},
		{"NaN, Inf and unknown bindings ignored", []add{{0, 0, math.NaN()}, {0, 0, math.Inf(1)}, {2, 0, 1}, {-1, 0, 1}, {0, 0, 1}},
			[]out{{0, []StatRow{{"cell.max", 1, 1, 1}}}}},
		{"nothing", nil, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var got []out
			d := NewDecimator([]string{"cell.max", "pack.current"}, func(sec int64, rows []StatRow) {
				got = append(got, out{sec, append([]StatRow(nil), rows...)})
			})
			for _, a := range tt.adds {
				d.Add(a.bind, a.t, a.v)
			}
			d.Flush()
			d.Flush()
			if !reflect.DeepEqual(got, tt.want) {
				t.Errorf("got  %+v\nwant %+v", got, tt.want)
			}
		})
	}
}
