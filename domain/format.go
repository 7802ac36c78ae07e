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
	suffix := ""
	if unit != "" {
		suffix = " " + unit
	}
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return fmt.Sprintf("%v%s", v, suffix)
	}
	if !(u > 0) || math.IsInf(u, 0) {
		return strconv.FormatFloat(v, 'g', 4, 64) + suffix
	}
	exp := 0
	if av := math.Max(math.Abs(v), u); av >= 1e5 || av < 1e-3 {
		exp = int(math.Floor(math.Log10(av)))
		scale := math.Pow(10, float64(exp))
		v, u = v/scale, u/scale
	}
	dec := max(uncertaintyDecimals(u), 0)
	body := fmt.Sprintf("%.*f ± %.*f", dec, roundTo(v, dec), dec, roundTo(u, dec))
	if exp != 0 {
		return fmt.Sprintf("(%s)e%d%s", body, exp, suffix)
	}
	return body + suffix
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
