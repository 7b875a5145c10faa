package pack

import (
	"math"
	"strconv"
)

// Num is a float64 that marshals NaN and ±Inf as JSON null (RFC 8259 §6
// allows neither).
type Num float64

// MarshalJSON implements json.Marshaler. Finite values are written with 12
// significant digits, which drops the binary noise of scaling and
// subtraction (3.9250000000000003 → 3.925) and keeps data times to 10 ms.
func (n Num) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', 12, 64), nil
}

// numPtr returns nil for NaN or ±Inf, else a pointer to the value.
func numPtr(f float64) *Num {
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return nil
	}
	n := Num(f)
	return &n
}
