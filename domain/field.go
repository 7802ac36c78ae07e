package domain

import (
	"fmt"
	"math"

	"example.com/fluxroom/domain/fit"
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
		// The current's meter; it tells a reading at the current limit from
		// one above it.
		{Name: "current_resolution", Label: "ammeter resolution", Dim: Current, Unit: "A", Default: 0.01,
			Min: 0, MinExclusive: true, Max: 1},
	}
}

// assessFieldPoints fits ρ and runs the diagnoses every field experiment
// shares. modelRelU is the relative uncertainty of the theory from the bench
// constants (common to every point); fieldUnit is the unit the bench's
// meter reads the field in, which a unit slip most likely starts from.
func assessFieldPoints(pts []fieldPoint, modelRelU float64, tol Tolerance, what, fieldUnit string, plot bool) (Assessment, findings, fieldRun, bool) {
	// One allocation for the run's five lists: this runs after every
	// reading.
	n := len(pts)
	lists := make([]float64, 5*n)
	x, y, u, ratios, relU := lists[:n:n], lists[n:2*n:2*n], lists[2*n:3*n:3*n], lists[3*n:4*n:4*n], lists[4*n:]
	for i, p := range pts {
		x[i], y[i] = p.theory, p.measured
		u[i] = math.Hypot(p.u, math.Abs(p.measured)*p.theoryRelU)
	}
	rho, se, chi2nu, err := fit.Ratio(x, y, u)
	if err != nil {
		return Assessment{Verdict: NeedData, Reason: "no reading has a theory value yet: check currents and positions"}, nil, fieldRun{}, false
	}
	sc := scatter{chi2: chi2nu * float64(len(pts)-1), nu: len(pts) - 1}
	measured := Measurement{Value: rho, Uncertainty: se}
	predicted := Measurement{Value: 1, Uncertainty: modelRelU}
	// FitRatio scaled se up by √(χ²/ν) when the scatter exceeds the
	// readings' uncertainties; unscaled, it is what the instruments allow.
	z, pct, v, extra := judgeScatter(measured, predicted, se/math.Sqrt(math.Max(1, chi2nu)), sc, tol)
	fitRelU := se / math.Abs(rho)
	items := []BudgetItem{{Input: "field readings (fit)", RelU: fitRelU}, {Input: "bench constants", RelU: modelRelU}}
	if extra != nil {
		items[0].RelU = math.Sqrt(math.Max(0, fitRelU*fitRelU-extra.RelU*extra.RelU))
		items = append(items, *extra)
	}
	a := Assessment{Verdict: v, Measured: measured, Predicted: predicted, ResultUnit: "1", ResultName: "B/B_theory",
		Z: z, PercentDiff: pct, Budget: budget(items...)}
	a.Reason = fmt.Sprintf("%s: B/B_theory %s (%+.1f %%, z = %+.1f), %d readings",
		what, FormatMeasurement(rho, se, ""), pct, z, len(pts))

	if plot {
		pp := make([]PlotPoint, len(pts))
		for i, p := range pts {
			pp[i] = PlotPoint{X: p.theory, Y: p.measured, UY: u[i], ReadingID: p.reading.id}
		}
		p := linePlot("B_theory (T)", "B measured (T)", pp, 0, rho, 1, tol.GoodPercent)
		p.XValue, p.YValue = "field", "field"
		a.Plot = &p
	}

	var fs findings
	// Point by point: one reading apart from the rest is named first; the
	// causes that concern the whole run are then looked for without it, so
	// that one slipped point is not read as a factor in every reading.
	for i, p := range pts {
		ratios[i] = p.measured / p.theory
		relU[i] = u[i] / math.Abs(p.measured)
	}
	run := fieldRun{pts: pts, rho: Measurement{Value: rho, Uncertainty: se}}
	cx, cy, cu, cratios, crelU := x, y, u, ratios, relU
	if o, ok := loneOutlier(ratios, relU); ok {
		r := pts[o.i].reading
		if f, ok := slipFactor(o.factor, slipTolerance(o.sigma)); ok {
			fs.addPoint(CodeDecimalSlipPoint, r, fmt.Sprintf("reading #%d: B/B_theory %.3g while the others give %.3g: ×%g, a decimal point slipped in the field",
				r.seq, ratios[o.i], o.want, f), 0.9)
		} else if !o.restBeyond {
			fs.addPoint(CodeOutlierPoint, r, fmt.Sprintf("reading #%d: B/B_theory %.3g while the others give %.3g (×%.3g, %.0f standard uncertainties apart)",
				r.seq, ratios[o.i], o.want, o.factor, math.Abs(o.z)), 0.75)
		}
		cx, cy, cu, cratios, crelU = without(x, o.i), without(y, o.i), without(u, o.i), without(ratios, o.i), without(relU, o.i)
		if r, se, _, err := fit.Ratio(cx, cy, cu); err == nil {
			run = fieldRun{pts: without(pts, o.i), rho: Measurement{Value: r, Uncertainty: se}}
		}
	}
	uRel := math.Hypot(run.rho.RelUncertainty(), modelRelU)
	if v != Consistent {
		fs.matchFactor(run.rho.Value, uRel, "B/B_theory", CodeSignReversed)
		if fs.matchDecade(run.rho.Value, uRel, "B/B_theory") {
			d := &fs[len(fs)-1].Diagnosis
			if slip := decadeSlipUnits(MagneticField, fieldUnit, int(math.Round(math.Log10(run.rho.Value)))); slip != "" {
				d.Evidence += ": a field in " + slip
			}
		}
	}
	if n := len(cx); n >= 6 {
		// A drift must be real (weightedTrend) and matter: more than 5 %
		// over the run // common practice.
		var stack [2 * stackReadings]float64
		buf := stack[:]
		if 2*n > len(buf) {
			buf = make([]float64, 2*n)
		}
		order, uRatio := buf[:n], buf[n:2*n]
		for i := range order {
			order[i] = float64(i)
			uRatio[i] = crelU[i] * math.Abs(cratios[i])
		}
		g, err := fit.Linear(order, cratios)
		if t, crit, ok := weightedTrend(order, cratios, uRatio); ok && err == nil && math.Abs(t) > crit &&
			math.Abs(g.Slope)*float64(n-1) > 0.05*math.Abs(median(cratios)) {
			fs.add(CodeDrift, fmt.Sprintf("B/B_theory trends with reading order (t = %+.1f)", t), 0.6, true)
		}
		var ss, us float64
		for i, p := range run.pts {
			r := cy[i] - run.rho.Value*cx[i]
			ss += r * r
			us += p.u * p.u
		}
		if math.Sqrt(ss/float64(n-1)) < 0.05*math.Sqrt(us/float64(n)) {
			fs.add(CodeTooGood, fmt.Sprintf("the readings scatter %.2g of what the meter allows", math.Sqrt(ss/float64(n-1))/math.Sqrt(us/float64(n))), 0.55, false)
		}
	}
	a.scatter = sc
	return a, fs, run, true
}

// fieldRun is the part of a field run that the causes concerning the whole
// run are looked for in: every reading but one that stands apart, with the
// ratio fitted to them.
type fieldRun struct {
	pts []fieldPoint
	rho Measurement
}

// probeNotAligned adds the cos θ reading when ρ is low by a factor that
// holds across the readings and nothing more specific matched.
func probeNotAligned(fs *findings, rho float64, ratios []float64, xs []float64) {
	if rho < 0.5 || rho > 0.97 {
		return
	}
	if len(ratios) >= 3 && math.Abs(fit.TrendT(xs, ratios)) > 3 {
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
