package domain

import (
	"fmt"
	"math"
)

// The field experiments (long straight wire, solenoid, flat coil) share one
// shape: each reading has a measured field and a theory value from the bench
// constants and the reading's current and position. The result is
// ρ = B/B_theory, fitted through the origin with weights.

// fieldPoint is one reading of a field experiment, in SI.
type fieldPoint struct {
	measured float64 // the field the bench's own effect makes (background removed when possible)
	u        float64 // its standard uncertainty
	theory   float64
	// theoryRelU is the relative uncertainty of the theory value from the
	// reading's own position (distance) uncertainty.
	theoryRelU float64
	reading    siReading
}

// meterU is the standard uncertainty of one field reading: the meter's
// resolution and its accuracy, a share of the reading // common practice.
func meterU(c map[string]Measurement, b float64) float64 {
	return math.Hypot(resolutionU(c["field_resolution"].Value), c["meter_accuracy"].Value*math.Abs(b))
}

// fieldConstants are the meter constants every field experiment has.
func fieldConstants() []QuantitySpec {
	return []QuantitySpec{
		{Name: "field_resolution", Label: "gaussmeter resolution", Dim: MagneticField, Unit: "G", Default: 0.01,
			Min: 0, MinExclusive: true, Max: 0.01},
		// Hand-held gaussmeters are good to a few per cent of the reading;
		// 2 % // common practice.
		{Name: "meter_accuracy", Label: "gaussmeter accuracy (fraction of reading)", Dim: Dimensionless, Unit: "1", Default: 0.02,
			Min: 0, Max: 0.5},
	}
}

// assessFieldPoints fits ρ and runs the diagnoses every field experiment
// shares. modelRelU is the relative uncertainty of the theory from the bench
// constants (common to every point).
func assessFieldPoints(pts []fieldPoint, modelRelU float64, tol Tolerance, what string, plot bool) (Assessment, findings, bool) {
	x := make([]float64, len(pts))
	y := make([]float64, len(pts))
	u := make([]float64, len(pts))
	for i, p := range pts {
		x[i], y[i] = p.theory, p.measured
		u[i] = math.Hypot(p.u, math.Abs(p.measured)*p.theoryRelU)
	}
	rho, se, _, err := FitRatio(x, y, u)
	if err != nil {
		return Assessment{Verdict: NeedData, Reason: "no reading has a theory value yet: check currents and positions"}, nil, false
	}
	measured := Measurement{Value: rho, Uncertainty: se}
	predicted := Measurement{Value: 1, Uncertainty: modelRelU}
	z, pct, v := combine(measured, predicted, tol)
	a := Assessment{Verdict: v, Measured: measured, Predicted: predicted, ResultUnit: "1", ResultName: "B/B_theory",
		Z: z, PercentDiff: pct,
		Budget: budget(BudgetItem{Input: "field readings (fit)", RelU: se / math.Abs(rho)}, BudgetItem{Input: "bench constants", RelU: modelRelU})}
	a.Reason = fmt.Sprintf("%s: B/B_theory %s (%+.1f %%, z = %+.1f), %d readings",
		what, FormatMeasurement(rho, se, ""), pct, z, len(pts))

	if plot {
		pp := make([]PlotPoint, len(pts))
		for i, p := range pts {
			pp[i] = PlotPoint{X: p.theory, Y: p.measured, UY: u[i], ReadingID: p.reading.id}
		}
		p := linePlot("B_theory (T)", "B measured (T)", pp, 0, rho, 1, tol.GoodPercent)
		a.Plot = &p
	}

	var fs findings
	uRel := math.Hypot(se/math.Abs(rho), modelRelU)
	if v != Consistent {
		fs.matchFactor(rho, uRel, "B/B_theory", CodeSignReversed)
		fs.matchDecade(rho, uRel, "B/B_theory")
	}
	// Point by point, for shape checks.
	ratios := make([]float64, len(pts))
	order := make([]float64, len(pts))
	for i, p := range pts {
		ratios[i] = p.measured / p.theory
		order[i] = float64(i)
	}
	if len(pts) >= 4 {
		// The median and MAD barely move when one point is left out, so the
		// whole set's serve every point: O(n log n), not O(n² log n).
		med := median(ratios)
		spread := math.Max(mad(ratios), 0.02*math.Abs(med))
		for i, r := range ratios {
			if math.Abs(r-med) <= 5*spread {
				continue
			}
			for _, f := range []float64{10, 0.1} {
				if math.Abs(r/f-med) < 3*spread {
					fs.add(CodeDecimalSlipPoint, fmt.Sprintf("reading %d: B/B_theory %.3g while the others give %.3g", i+1, r, med), 0.9, true)
				}
			}
		}
	}
	if len(pts) >= 6 {
		// A drift must be real (t > 4) and matter: more than 5 % over the run.
		if g, err := FitLine(order, ratios); err == nil && g.SlopeSE > 0 && math.Abs(g.Slope/g.SlopeSE) > 4 &&
			math.Abs(g.Slope)*float64(len(pts)-1) > 0.05*math.Abs(median(ratios)) {
			t := g.Slope / g.SlopeSE
			fs.add(CodeDrift, fmt.Sprintf("B/B_theory trends with reading order (t = %+.1f)", t), 0.6, true)
		}
		var ss, us float64
		for i := range pts {
			r := y[i] - rho*x[i]
			ss += r * r
			us += pts[i].u * pts[i].u
		}
		if math.Sqrt(ss/float64(len(pts)-1)) < 0.05*math.Sqrt(us/float64(len(pts))) {
			fs.add(CodeTooGood, fmt.Sprintf("the readings scatter %.2g of what the meter allows", math.Sqrt(ss/float64(len(pts)-1))/math.Sqrt(us/float64(len(pts)))), 0.55, false)
		}
	}
	return a, fs, true
}

// probeNotAligned adds the cos θ reading when ρ is low by a factor that
// holds across the readings and nothing more specific matched.
func probeNotAligned(fs *findings, rho float64, ratios []float64, xs []float64) {
	if rho < 0.5 || rho > 0.97 {
		return
	}
	if len(ratios) >= 3 && math.Abs(TrendT(xs, ratios)) > 3 {
		return // a trend with distance points elsewhere
	}
	theta := math.Acos(rho) * 180 / math.Pi
	fs.add(CodeProbeNotAligned, fmt.Sprintf("B/B_theory = %.3f at every position, as a probe turned by about %.0f° would give", rho, theta), 0.6, true)
}

// reportedTheory compares the group's own theory values with the tool's.
// Groups often use a simpler formula than the tool (an infinite wire, an
// ideal solenoid), so each of bases is tried in turn as the tool's side; a
// base returns the theory value for a point. It returns the median ratio
// against the first base.
func reportedTheory(fs *findings, pts []fieldPoint, bases []func(fieldPoint) float64, codes ...string) (float64, bool) {
	var first float64
	for bi, base := range bases {
		var ratios []float64
		for _, p := range pts {
			if t := base(p); p.reading.has("reported_theory") && t != 0 {
				ratios = append(ratios, p.reading.v("reported_theory")/t)
			}
		}
		if len(ratios) == 0 {
			return 0, false
		}
		rho := median(ratios)
		if bi == 0 {
			first = rho
		}
		what := "the group's B_theory / the tool's"
		before := len(*fs)
		fs.matchFactor(rho, 0.01, what, codes...)
		if len(*fs) == before {
			fs.matchDecade(rho, 0.01, what)
		}
	}
	return first, true
}

// toolTheory is the base that uses the tool's own theory value.
func toolTheory(p fieldPoint) float64 { return p.theory }
