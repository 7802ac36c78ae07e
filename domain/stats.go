package domain

import (
	"errors"
	"math"

	"example.com/fluxroom/domain/fit"
)

// The tests on a run's shape (an intercept, a curvature, a trend, one
// reading apart from the others, scatter beyond the instruments) each take
// their threshold from the distribution of their statistic for the run's
// degrees of freedom, at one false-alarm probability, so a clean run of five
// readings is flagged as rarely as a clean run of thirty. The critical values
// come from gonum's stat/distuv, written into tables.go by
// domain/internal/gentables (make generate), so that the domain, which the
// dashboard's WebAssembly links, carries numbers rather than a
// special-function library.

// falseAlarm is the probability that one shape test flags a clean run: a run
// meets about five such tests, which keeps clean runs under 1 % "check"
// // common practice (a 0.1 % significance level per test).
const falseAlarm = 0.001

// tShape is the two-sided critical value of Student's t with nu degrees of
// freedom at falseAlarm: a shape test's t statistic must pass it. Past the
// table, the Cornish–Fisher expansion t ≈ z + (z³ + z)/4ν + (5z⁵ + 16z³ +
// 3z)/96ν² [pub: Abramowitz & Stegun 26.7.5] is within 1e-4 of it. +Inf when nu < 1.
func tShape(nu int) float64 {
	switch {
	case nu < 1:
		return math.Inf(1)
	case nu < len(tTwoSided001):
		return tTwoSided001[nu]
	}
	z, v := normalCritical(falseAlarm), float64(nu)
	z3 := z * z * z
	return z + (z3+z)/(4*v) + (5*z3*z*z+16*z3+3*z)/(96*v*v)
}

// chi2Critical is the upper point of χ² with nu degrees of freedom at the
// tabulated probability (chi2Upper001 or chi2Upper05); past the table, the
// Wilson–Hilferty form ν(1 − 2/9ν + z·√(2/9ν))³ [pub: Abramowitz & Stegun
// 26.4.17], with z the one-sided normal point of the same probability.
func chi2Critical(table []float64, oneSidedZ float64, nu int) float64 {
	if nu < len(table) {
		return table[nu]
	}
	v := float64(nu)
	c := 2 / (9 * v)
	return v * math.Pow(1-c+oneSidedZ*math.Sqrt(c), 3)
}

// One-sided normal points for chi2Critical past its tables:
// P(Z > z) = 0.001 and 0.05 [pub: any statistics table].
const (
	zUpper001 = 3.090232306167813
	zUpper05  = 1.6448536269514722
)

// chi2Improbable reports whether a χ² this large over nu degrees of freedom
// has a probability below falseAlarm for a clean run.
func chi2Improbable(chi2 float64, nu int) bool {
	return nu >= 1 && chi2 > chi2Critical(chi2Upper001[:], zUpper001, nu)
}

// normalCritical is the two-sided critical value of the standard normal
// distribution at probability p: P(|Z| > z) = p, z = √2·erf⁻¹(1 − p).
func normalCritical(p float64) float64 {
	return math.Sqrt2 * math.Erfinv(1-p)
}

// weightedTrend fits y = a + b·x with weights 1/u² and returns b's z
// statistic and the threshold it must pass. With the readings' standard
// uncertainties u known from the instruments, b/se(b) is normal for a clean
// run, so the threshold is normal at falseAlarm; when the residuals scatter
// clearly more than u allows (birge), se(b) grows by √(χ²/ν) and the
// threshold is Student's t for ν = n − 2, the Birge-ratio treatment [pub: JCGM 100:2008
// (GUM) H.3; any weighted least-squares text]. ok is false for a fit that
// cannot be made.
func weightedTrend(x, y, u []float64) (z, threshold float64, ok bool) {
	n := len(x)
	if n < 3 {
		return 0, 0, false
	}
	var sw, sx, sy float64
	for i := range x {
		if !(u[i] > 0) {
			return 0, 0, false
		}
		w := 1 / (u[i] * u[i])
		sw, sx, sy = sw+w, sx+w*x[i], sy+w*y[i]
	}
	mx, my := sx/sw, sy/sw
	var sxx, sxy float64
	for i := range x {
		w := 1 / (u[i] * u[i])
		sxx += w * (x[i] - mx) * (x[i] - mx)
		sxy += w * (x[i] - mx) * (y[i] - my)
	}
	if sxx == 0 {
		return 0, 0, false
	}
	b := sxy / sxx
	var chi2 float64
	for i := range x {
		r := (y[i] - my - b*(x[i]-mx)) / u[i]
		chi2 += r * r
	}
	scale, threshold := birge(chi2, n-2)
	return b / (math.Sqrt(1/sxx) * scale), threshold, true
}

// birge is the Birge-ratio rule of the weighted fits: when a fit's
// residuals scatter beyond their known uncertainties clearly enough (χ²
// improbable at 5 % for ν degrees of freedom), its standard errors scale by
// √(χ²/ν) and a coefficient's z must pass Student's t for ν; otherwise the
// known uncertainties stand (scale 1) and the threshold is normal. A χ²/ν a
// little above 1 is what a clean run of a few readings gives half the time,
// and is no reason to distrust the instruments' uncertainties // common practice.
func birge(chi2 float64, nu int) (scale, threshold float64) {
	if nu >= 1 && chi2 > chi2Critical(chi2Upper05[:], zUpper05, nu) {
		return math.Sqrt(chi2 / float64(nu)), tShape(nu)
	}
	return 1, normalCritical(falseAlarm)
}

// weightedModel fits y = Σ coef[j]·cols[j] with weights 1/u² and returns
// the coefficients, their standard errors and the threshold a coefficient's
// z must pass to count, as weightedTrend does for one slope: standard errors
// from the known u and a normal threshold while the residuals stay within
// u, scaled by √(χ²/ν) with Student's t beyond that.
func weightedModel(cols [][]float64, y, u []float64) (coef, se []float64, threshold float64, err error) {
	n := len(y)
	sc := make([][]float64, len(cols))
	for j, c := range cols {
		sc[j] = make([]float64, n)
		for i := range c {
			sc[j][i] = c[i] / u[i]
		}
	}
	sy := make([]float64, n)
	for i := range y {
		if !(u[i] > 0) {
			return nil, nil, 0, errors.New("domain: every point needs an uncertainty > 0")
		}
		sy[i] = y[i] / u[i]
	}
	coef, se, err = fit.Model(sc, sy)
	if err != nil {
		return nil, nil, 0, err
	}
	nu := n - len(cols)
	var chi2 float64
	for i := range sy {
		r := sy[i]
		for j := range coef {
			r -= coef[j] * sc[j][i]
		}
		chi2 += r * r
	}
	// fit.Model scaled the standard errors by √(χ²/ν) already: the rule's
	// scale replaces that one.
	scale, threshold := birge(chi2, nu)
	if s2 := chi2 / float64(nu); s2 > 0 {
		for j := range se {
			se[j] = se[j] / math.Sqrt(s2) * scale
		}
	}
	return coef, se, threshold, nil
}
