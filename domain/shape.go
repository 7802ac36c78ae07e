package domain

import (
	"fmt"
	"math"
	"slices"

	"example.com/fluxroom/domain/fit"
)

// addLinePoint adds the finding about one reading apart from the line the
// others make (lineOutlier): a slipped decimal when its factor is a power of
// ten, otherwise an outlier when the other readings agree with their
// instruments. Names say what y is.
func (fs *findings) addLinePoint(rs []siReading, y []float64, o outlier, yName, yUnit string) {
	r, want := rs[o.i], o.want
	if sf, ok := slipFactor(o.factor, slipTolerance(o.sigma)); ok {
		fs.addPoint(CodeDecimalSlipPoint, r, fmt.Sprintf("reading #%d: %s %.4g %s, while the other readings put it near %.4g: ×%g, a decimal point slipped",
			r.seq, yName, y[o.i], yUnit, want, sf), 0.9)
	} else if !o.restBeyond {
		fs.addPoint(CodeOutlierPoint, r, fmt.Sprintf("reading #%d: %s %.4g %s, while the other readings put it near %.4g (%.0f standard uncertainties apart)",
			r.seq, yName, y[o.i], yUnit, want, math.Abs(o.z)), 0.75)
	}
}

// without returns s less its element i, in a new slice.
func without[T any](s []T, i int) []T {
	return append(append(make([]T, 0, len(s)-1), s[:i]...), s[i+1:]...)
}

// stackReadings is the longest run whose per-reading working lists the
// judging keeps on the stack; a longer one allocates them.
const stackReadings = 64

// lineShape runs the checks on a straight-line fit's residuals: a trend
// with time, and scatter too small for the instruments. uRes is the
// standard uncertainty of one y value from the instruments' resolution
// alone, uy from everything the instruments allow (resolution,
// repeatability, the x reading's share).
func lineShape(fs *findings, x, y []float64, f fit.Line, uRes, uy float64, yUnit string) {
	n := len(x)
	if n >= 6 {
		// On the stack for a lab's run: this runs after every reading.
		var stack [3 * stackReadings]float64
		buf := stack[:]
		if 3*n > len(buf) {
			buf = make([]float64, 3*n)
		}
		res, order, us := buf[:n], buf[n:2*n], buf[2*n:3*n]
		for i := range x {
			res[i] = y[i] - (f.Intercept + f.Slope*x[i])
			order[i] = float64(i)
		}
		for i := range us {
			us[i] = uy
		}
		if t, crit, ok := weightedTrend(order, res, us); ok && math.Abs(t) > crit && f.ResidualSD > uy {
			fs.add(CodeDrift, fmt.Sprintf("residuals trend with reading order (t = %+.1f)", t), 0.7, true)
		}
		if uRes > 0 && f.ResidualSD < 0.3*uRes {
			fs.add(CodeTooGood, fmt.Sprintf("residual scatter %.2g %s with %d readings, below the %.2g %s the resolution alone gives",
				f.ResidualSD, yUnit, n, uRes, yUnit), 0.55, false)
		}
	}
}

// lineOutlier finds the one reading that stands apart from the line
// through the others. The leave-one-out prediction and scatter come from
// the hat values of the full fit, O(n): ŷ₍ᵢ₎ = yᵢ − eᵢ/(1−hᵢᵢ),
// hᵢᵢ = 1/n + (xᵢ−x̄)²/Sxx, Var(yᵢ − ŷ₍ᵢ₎) = σ²/(1−hᵢᵢ) [pub: any regression
// text, leave-one-out (deleted) residuals]. σ is the others' residual
// scatter, never below uy, what the instruments allow; the threshold is
// two-sided normal at falseAlarm/n, as loneOutlier's. The factor is yᵢ over
// its prediction, and sigma its standard uncertainty in logarithms.
func lineOutlier(x, y []float64, f fit.Line, uy float64) (o outlier, ok bool) {
	n := len(x)
	if n < 4 || f.Sxx == 0 || f.ThroughOrigin {
		return o, false
	}
	mx := fit.Mean(x)
	var ssr float64
	var stack [stackReadings]float64
	e := stack[:]
	if n > len(e) {
		e = make([]float64, n)
	}
	e = e[:n]
	for i := range x {
		e[i] = y[i] - (f.Intercept + f.Slope*x[i])
		ssr += e[i] * e[i]
	}
	crit := normalCritical(falseAlarm / float64(n))
	o.i = -1
	for i := range x {
		h := 1/float64(n) + (x[i]-mx)*(x[i]-mx)/f.Sxx
		if h >= 1 {
			continue
		}
		loo := e[i] / (1 - h)
		want := y[i] - loo
		// Residual variance of the fit without reading i.
		s2 := math.Max(0, (ssr-e[i]*e[i]/(1-h))/float64(n-3))
		sd := math.Max(math.Sqrt(s2), uy) / math.Sqrt(1-h)
		if !(sd > 0) {
			continue
		}
		z := loo / sd
		if math.Abs(z) <= crit || (o.i >= 0 && math.Abs(z) <= math.Abs(o.z)) {
			continue
		}
		o = outlier{i: i, want: want, z: z, restBeyond: uy > 0 && scatter{chi2: s2 * float64(n-3) / (uy * uy), nu: n - 3}.beyond()}
		// A prediction near zero (the reading at no current) gives no
		// factor: a slip there is invisible.
		if want != 0 && y[i]/want > 0 {
			o.factor, o.sigma = y[i]/want, sd/math.Abs(want)
		}
	}
	return o, o.i >= 0
}

// median returns the median of v (v is not changed).
func median(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), v...)
	sortFloats(s)
	m := len(s) / 2
	if len(s)%2 == 1 {
		return s[m]
	}
	return (s[m-1] + s[m]) / 2
}

// mad is the median absolute deviation scaled to a standard deviation for
// normal data (×1.4826) // common practice in robust statistics.
func mad(v []float64) float64 {
	m := median(v)
	d := make([]float64, len(v))
	for i, x := range v {
		d[i] = math.Abs(x - m)
	}
	return 1.4826 * median(d)
}

func sortFloats(s []float64) { slices.Sort(s) }

// scatter compares a run's scatter about its fit with what the instruments
// allow: chi2 is Σ(residual/u)² with each reading's u from the instruments'
// resolutions and accuracies alone, nu the fit's degrees of freedom.
type scatter struct {
	chi2 float64
	nu   int
}

// scatterRatioMin is the least χ²/ν called far beyond the instruments: a
// scatter twice what they allow, so that a bench whose instruments are a
// little noisier than their specifications is not flagged on that alone
// // common practice.
const scatterRatioMin = 4.0

func (s scatter) ratio() float64 {
	if s.nu < 1 {
		return 0
	}
	return s.chi2 / float64(s.nu)
}

// beyond reports whether the scatter is far beyond what the instruments
// allow: χ² improbable for ν degrees of freedom (chi2Improbable) and above
// scatterRatioMin per degree of freedom.
func (s scatter) beyond() bool {
	return s.nu >= 1 && s.ratio() > scatterRatioMin && chi2Improbable(s.chi2, s.nu)
}

// judgeScatter judges measured against predicted when the result's
// uncertainty may have been inflated by the run's scatter. instrumentU is
// the result's uncertainty from the instruments alone. When the scatter is
// far beyond what the instruments allow, the inflated uncertainty says how
// little the run pins the result down, not that the result agrees: the
// verdict then uses instrumentU, and the inflation stays in the budget,
// labelled, and in measured for the grade's precision.
func judgeScatter(measured, predicted Measurement, instrumentU float64, s scatter, tol Tolerance) (z, pct float64, v Verdict, extra *BudgetItem) {
	if !s.beyond() || !(instrumentU < measured.Uncertainty) {
		z, pct, v = combine(measured, predicted, tol)
		return z, pct, v, nil
	}
	z, pct, v = combine(Measurement{Value: measured.Value, Uncertainty: instrumentU}, predicted, tol)
	inflation := math.Sqrt(measured.Uncertainty*measured.Uncertainty - instrumentU*instrumentU)
	return z, pct, v, &BudgetItem{Input: fmt.Sprintf("scatter beyond the instruments (χ²/ν = %.3g)", s.ratio()),
		RelU: inflation / math.Abs(measured.Value)}
}

// addScatter adds the scatter-beyond-instruments diagnosis unless a more
// specific finding about the run's shape already explains the scatter.
func (fs *findings) addScatter(s scatter) {
	if !s.beyond() || fs.has(explainsScatter...) {
		return
	}
	fs.add(CodeScatterBeyond, fmt.Sprintf("the readings scatter %.3g× what the instruments allow (χ²/ν = %.3g over ν = %d, where a clean run passes %.3g once in a thousand)",
		math.Sqrt(s.ratio()), s.ratio(), s.nu, chi2Critical(chi2Upper001[:], zUpper001, s.nu)/float64(s.nu)), 0.85, true)
}

// explainsScatter are the findings that say where a run's excess scatter
// comes from.
var explainsScatter = []string{CodeDecimalSlipPoint, CodeOutlierPoint, CodeDrift, CodeNonlinear, CodeWrongScale,
	CodeWireBackground, CodeTipOffset, CodeLargeOrbitsLow, CodeBackgroundAxial, CodeCoilDiameterAsRadius}

// outlier is one reading that stands apart from the others.
type outlier struct {
	i int
	// want is what the others give for the reading's value, and factor the
	// size of the value over it (signs are left out: a sign is its own
	// diagnosis); 0 when the others give about nothing.
	want, factor float64
	// sigma is the standard uncertainty of ln|factor|, and z = ln|factor|/sigma.
	sigma, z float64
	// restBeyond: the other readings scatter beyond the instruments too.
	restBeyond bool
}

// loneOutlier looks for the one reading whose value q[i] stands apart from
// the weighted mean of the others, in logarithms (so ×10 and ×0.1 weigh the
// same): z_i = (ln|q_i| − m₋ᵢ)/√(s_i² + 1/W₋ᵢ), with s_i = relU[i] and the
// others' weighted mean m₋ᵢ and weight W₋ᵢ from running sums, O(n)
// [pub: any regression text, leave-one-out residuals]. When the others
// scatter more than their uncertainties allow, σ grows by √(χ²₋ᵢ/ν₋ᵢ). The
// threshold is two-sided normal at falseAlarm/n, a Bonferroni share for
// each of the n readings // common practice. ok is false when none stands
// apart.
func loneOutlier(q, relU []float64) (o outlier, ok bool) {
	n := len(q)
	if n < 4 {
		return o, false
	}
	l := make([]float64, n)
	w := make([]float64, n)
	var sw, swl, swll float64
	for i := range q {
		if q[i] == 0 || !(relU[i] > 0) || math.IsInf(relU[i], 0) {
			continue // no weight: never a candidate, never counted
		}
		l[i] = math.Log(math.Abs(q[i]))
		w[i] = 1 / (relU[i] * relU[i])
		sw, swl, swll = sw+w[i], swl+w[i]*l[i], swll+w[i]*l[i]*l[i]
	}
	crit := normalCritical(falseAlarm / float64(n))
	best := outlier{i: -1}
	for i := range q {
		if w[i] == 0 {
			continue
		}
		W := sw - w[i]
		if W <= 0 {
			continue
		}
		m := (swl - w[i]*l[i]) / W
		rest := scatter{chi2: math.Max(0, swll-w[i]*l[i]*l[i]-W*m*m), nu: n - 2}
		sigma := math.Sqrt((1/w[i] + 1/W) * math.Max(1, rest.ratio()))
		z := (l[i] - m) / sigma
		if math.Abs(z) > crit && (best.i < 0 || math.Abs(z) > math.Abs(best.z)) {
			f := math.Exp(l[i] - m)
			best = outlier{i: i, want: q[i] / f, factor: f, sigma: sigma, z: z, restBeyond: rest.beyond()}
		}
	}
	return best, best.i >= 0
}

// slipFactor reports which power of ten from 10⁻² to 10² (other than 1)
// a factor is within tolerance of: a decimal point slipped by one or two
// places. tol is in logarithms.
func slipFactor(f, tol float64) (float64, bool) {
	if f <= 0 {
		return 0, false
	}
	k := math.Round(math.Log10(f))
	if k == 0 || math.Abs(k) > 2 {
		return 0, false
	}
	if math.Abs(math.Log(f)-k*math.Ln10) <= tol {
		return math.Pow(10, k), true
	}
	return 0, false
}

// slipTolerance is how close (in logarithms) an outlier's factor must come
// to a slip's: three of its standard uncertainties, and never less than
// 10 %, the spread of values within one lab run // common practice.
func slipTolerance(sigma float64) float64 { return math.Max(3*sigma, 0.1) }
