package analyze

import (
	"math"
	"sort"
	"strconv"
)

// Num is a number in a result: NaN or ±Inf means "none" and is written to
// JSON as null (RFC 8259 §6 has no NaN), otherwise with up to 10
// significant digits.
type Num float64

// none is the missing number.
var none = Num(math.NaN())

// Valid reports whether the number is finite.
func (n Num) Valid() bool { return !math.IsNaN(float64(n)) && !math.IsInf(float64(n), 0) }

// MarshalJSON writes null for a missing number.
func (n Num) MarshalJSON() ([]byte, error) {
	if !n.Valid() {
		return []byte("null"), nil
	}
	f, _ := strconv.ParseFloat(strconv.FormatFloat(float64(n), 'g', 10, 64), 64)
	return strconv.AppendFloat(nil, f, 'f', -1, 64), nil
}

// UnmarshalJSON reads a number or null.
func (n *Num) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*n = none
		return nil
	}
	f, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return err
	}
	*n = Num(f)
	return nil
}

// nums converts a slice.
func nums(x []float64) []Num {
	out := make([]Num, len(x))
	for i, v := range x {
		out[i] = Num(v)
	}
	return out
}

// mohm converts ohms to a milliohm Num.
func mohm(r float64) Num { return Num(r * 1000) }

func sortFloats(x []float64) { sort.Float64s(x) }

func itoa(n int) string { return strconv.Itoa(n) }

func ftoa(f float64) string { return strconv.FormatFloat(f, 'g', 3, 64) }
