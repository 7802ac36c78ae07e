package domain

import (
	"errors"
	"math"
)

// Fit is a least-squares straight line y = Intercept + Slope·x with the
// standard errors of its parameters.
type Fit struct {
	Slope, Intercept     float64
	SlopeSE, InterceptSE float64
	// ResidualSD is the residual standard deviation sqrt(SSR/(n-p)).
	ResidualSD float64
	// RSquared is 1 - SSR/SST with SST about the mean, or about zero for a
	// fit through the origin (the uncentred R² that NIST StRD certifies for
	// NoInt1 and NoInt2).
	RSquared float64
	N        int
	// ThroughOrigin is true when the intercept was fixed at zero.
	ThroughOrigin bool
	// Sxx is Σ(x-x̄)², or Σx² through the origin; the resolution floor of
	// the slope's uncertainty needs it.
	Sxx float64
}

// Errors of the fitting functions.
var (
	ErrTooFewPoints = errors.New("domain: too few points for a fit")
	ErrNoSpread     = errors.New("domain: all x values are the same")
)

// FitLine fits y = a + b·x by ordinary least squares. Sums are taken about the
// means so that data with a large offset (NIST StRD Norris) keep full precision.
func FitLine(x, y []float64) (Fit, error) {
	n := len(x)
	if n != len(y) {
		return Fit{}, errors.New("domain: x and y differ in length")
	}
	if n < 2 {
		return Fit{}, ErrTooFewPoints
	}
	mx, my := mean(x), mean(y)
	var sxx, sxy, syy float64
	for i := range x {
		dx, dy := x[i]-mx, y[i]-my
		sxx += dx * dx
		sxy += dx * dy
		syy += dy * dy
	}
	if sxx == 0 {
		return Fit{}, ErrNoSpread
	}
	b := sxy / sxx
	a := my - b*mx
	var ssr float64
	for i := range x {
		r := y[i] - (a + b*x[i])
		ssr += r * r
	}
	f := Fit{Slope: b, Intercept: a, N: n, Sxx: sxx}
	if n > 2 {
		s2 := ssr / float64(n-2)
		f.ResidualSD = math.Sqrt(s2)
		f.SlopeSE = math.Sqrt(s2 / sxx)
		f.InterceptSE = math.Sqrt(s2 * (1/float64(n) + mx*mx/sxx))
	}
	if syy > 0 {
		f.RSquared = 1 - ssr/syy
	}
	return f, nil
}

// FitOrigin fits y = b·x through the origin by ordinary least squares.
func FitOrigin(x, y []float64) (Fit, error) {
	n := len(x)
	if n != len(y) {
		return Fit{}, errors.New("domain: x and y differ in length")
	}
	if n < 1 {
		return Fit{}, ErrTooFewPoints
	}
	var sxx, sxy, syy float64
	for i := range x {
		sxx += x[i] * x[i]
		sxy += x[i] * y[i]
		syy += y[i] * y[i]
	}
	if sxx == 0 {
		return Fit{}, ErrNoSpread
	}
	b := sxy / sxx
	var ssr float64
	for i := range x {
		r := y[i] - b*x[i]
		ssr += r * r
	}
	f := Fit{Slope: b, N: n, Sxx: sxx, ThroughOrigin: true}
	if n > 1 {
		s2 := ssr / float64(n-1)
		f.ResidualSD = math.Sqrt(s2)
		f.SlopeSE = math.Sqrt(s2 / sxx)
	}
	if syy > 0 {
		f.RSquared = 1 - ssr/syy
	}
	return f, nil
}

func mean(v []float64) float64 {
	var s float64
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}
