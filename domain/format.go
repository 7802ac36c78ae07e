package domain

import (
	"fmt"
	"math"
	"strconv"
)

// FormatMeasurement writes v ± u with the uncertainty rounded to two
// significant figures when its leading digit is 1 or 2, else one, and the value
// rounded to the same decimal place // common practice. Very large or small
// values share a power of ten: "(1.76 ± 0.05)e11".
func FormatMeasurement(v, u float64, unit string) string {
	withUnit := func(b []byte) string {
		if unit != "" {
			b = append(append(b, ' '), unit...)
		}
		return string(b)
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return withUnit(fmt.Append(nil, v))
	}
	if !(u > 0) || math.IsInf(u, 0) {
		return withUnit(strconv.AppendFloat(nil, v, 'g', 4, 64))
	}
	exp := 0
	if av := math.Max(math.Abs(v), u); av >= 1e5 || av < 1e-3 {
		exp = int(math.Floor(math.Log10(av)))
		scale := math.Pow(10, float64(exp))
		v, u = v/scale, u/scale
	}
	dec := max(uncertaintyDecimals(u), 0)
	// Appended, not Sprintf'd: every judging writes a reason with two of
	// these, and fmt was a fifth of a coil-force judging's time.
	b := make([]byte, 0, 32+len(unit))
	if exp != 0 {
		b = append(b, '(')
	}
	b = strconv.AppendFloat(b, roundTo(v, dec), 'f', dec, 64)
	b = append(b, " ± "...)
	b = strconv.AppendFloat(b, roundTo(u, dec), 'f', dec, 64)
	if exp != 0 {
		b = append(b, ")e"...)
		b = strconv.AppendInt(b, int64(exp), 10)
	}
	return withUnit(b)
}

func roundTo(x float64, dec int) float64 {
	p := math.Pow(10, float64(dec))
	return math.Round(x*p) / p
}

// uncertaintyDecimals is the decimal place to round to for an uncertainty
// u > 0: two significant figures when its leading digit is 1 or 2, else one
// // common practice. Negative means rounding left of the point.
func uncertaintyDecimals(u float64) int {
	lead := int(math.Floor(math.Log10(u)))
	sig := 1
	if u/math.Pow(10, float64(lead)) < 3 {
		sig = 2
	}
	return sig - 1 - lead
}
