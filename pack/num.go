package pack

import (
	"math"
	"strconv"
)

// Num is a float64 that marshals NaN and ±Inf as JSON null (RFC 8259 §6
// allows neither) and finite values in the shortest form that reads back
// exactly.
type Num float64

// MarshalJSON implements json.Marshaler.
func (n Num) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

// numPtr returns nil for NaN or ±Inf, else a pointer to the value.
func numPtr(f float64) *Num {
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return nil
	}
	n := Num(f)
	return &n
}
