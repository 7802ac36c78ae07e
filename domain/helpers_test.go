package domain

import "math"

// relErr is |got − want| / |want|, or |got| when want is 0.
func relErr(got, want float64) float64 {
	if want == 0 {
		return math.Abs(got)
	}
	return math.Abs(got-want) / math.Abs(want)
}

func qty(v float64, unit string) Quantity { return Quantity{Value: v, Unit: unit} }

// round rounds x to a multiple of step, as a digital display does.
func round(x, step float64) float64 { return math.Round(x/step) * step }

// The same helpers for the external tests (package domain_test, which see
// this package's test files through their import).
var (
	RelErr = relErr
	Qty    = qty
	Round  = round
)
