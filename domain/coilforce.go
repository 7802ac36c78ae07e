package domain

import (
	"errors"
	"fmt"
	"math"

	"example.com/fluxroom/domain/fit"
)

// coilForce is the force on the one horizontal segment of a current-carrying
// coil that sits in a magnet's gap: F = N·B·L·I. Students read the force at
// several currents; the slope of F against I is compared with N·B·L.
var coilForce = &Experiment{
	ID:          "coil_force",
	Title:       "force on a coil in a magnet gap",
	MinReadings: 3,
	Constants: []QuantitySpec{
		{Name: "turns", Label: "turns N", Dim: Dimensionless, Unit: "1", Default: 100,
			Min: 1, Max: 100000, Integer: true},
		// Fringing makes the effective length longer than the ruler's; 2 %
		// covers a ruler reading on a few centimetres // common practice.
		{Name: "segment_length", Label: "segment length L", Dim: Length, Unit: "cm", Default: 4.0, DefaultRelU: 0.02,
			Min: 0, MinExclusive: true, Max: 1, Hint: "longer than any bench coil",
			Usual: [2]float64{0.01, 0.10}}, // 1–10 cm (from memory, PHYSICS.md §2(a))
		// Probe and gap non-uniformity give 2–5 % // common practice.
		{Name: "gap_field", Label: "gap field B", Dim: MagneticField, Unit: "T", Default: 0.120, DefaultRelU: 0.03,
			Min: 0, MinExclusive: true, Max: 1.5, Hint: "permanent magnets stay below about 1.45 T (from memory)",
			Usual: [2]float64{0.02, 0.5}}, // a magnet's gap (from memory, PHYSICS.md §2(a))
		{Name: "force_resolution", Label: "force sensor resolution", Dim: Force, Unit: "N", Default: 0.001,
			Min: 0, MinExclusive: true, Max: 1},
		{Name: "current_resolution", Label: "ammeter resolution", Dim: Current, Unit: "A", Default: 0.01,
			Min: 0, MinExclusive: true, Max: 1},
		// How far repeated readings of one steady force spread (a standard
		// deviation): a few mN for a ±10 N lab force sensor on a bench that
		// vibrates a little (from memory). Scatter beyond this and the
		// resolution is judged a run taken inconsistently.
		{Name: "force_repeatability", Label: "force sensor repeatability", Dim: Force, Unit: "N", Default: 0.005,
			Min: 0, Max: 1},
		// Coil supplies for this set-up give up to about 5 A // common practice.
		{Name: "max_current", Label: "coil current limit", Dim: Current, Unit: "A", Default: 5,
			Min: 0, MinExclusive: true, Max: 50},
	},
	Values: []QuantitySpec{
		// 50 A means a unit slip on any coil supply // common practice.
		{Name: "current", Label: "current I", Dim: Current, Unit: "A", Min: -50, Max: 50,
			Hint: "far above any coil supply", Usual: [2]float64{0.05, 5},
			SafetyLimit: "max_current", Resolution: "current_resolution",
			Caution: "Coil current above its rating overheats the coil: turn the supply down and let the coil cool."},
		{Name: "force", Label: "force F", Dim: Force, Unit: "N", Min: -100, Max: 100,
			Hint: "far above what a coil segment feels", Usual: [2]float64{0.001, 10}},
		// The group's own N·B·L, when they computed one: it lets the tool
		// check their arithmetic against its own.
		{Name: "reported_prediction", Label: "the group's own N·B·L", Dim: ForcePerCurrent, Unit: "N/A",
			Min: math.NaN(), Max: math.NaN(), Optional: true},
	},
}

func init() { register(coilForce) }

// Diagnosis codes of the force experiment. Append-only.
var (
	CodeSensorNotZeroed = entry(CatalogueEntry{Code: "coil_force.sensor_not_zeroed", Level: Shape,
		Cause:  "the force sensor was not zeroed before the run",
		Action: "re-zero the force sensor with no current and retake the 0 A point"})
	CodeLengthDoubled = entry(CatalogueEntry{Code: "coil_force.length_doubled", Level: Raw, Factor: 0.5,
		Cause:  "L counts both horizontal segments of the coil, but only one sits in the gap",
		Action: "use the length of the one segment inside the gap", Lookalikes: []string{"coil_force.turns_mismatch"}})
	CodeTurnsMismatch = entry(CatalogueEntry{Code: "coil_force.turns_mismatch", Level: Raw, Factor: 0.5,
		Cause:  "the coil on the bench has a different number of turns than the bench constant (e.g. 50 vs 100)",
		Action: "read the turns printed on the coil and correct the bench constant", Lookalikes: []string{"coil_force.length_doubled"}})
	CodeFieldProbeTilted = entry(CatalogueEntry{Code: "coil_force.field_probe_tilted", Level: Raw,
		Cause:  "the gap field B was measured with the probe tilted, so B and N·B·L are low (ρ = 1/cos θ)",
		Action: "re-measure B with the probe flat across the gap, turned for the largest reading"})
	CodeNonlinear = entry(CatalogueEntry{Code: "coil_force.nonlinear", Level: Shape,
		Cause:  "force is not proportional to current: the coil sits partly out of the gap, or the magnet shifted",
		Action: "centre the segment in the gap, fix the magnet and retake"})
	CodeTurnsLeftOut = entry(CatalogueEntry{Code: "coil_force.turns_left_out", Level: Recomputation,
		Cause:  "the group's own N·B·L leaves out the number of turns N",
		Action: "multiply by the number of turns"})
	CodeBothSegments = entry(CatalogueEntry{Code: "coil_force.both_segments", Level: Recomputation, Factor: 2,
		Cause:  "the group's own N·B·L counts both horizontal segments",
		Action: "only the segment inside the gap feels the field: use one length"})
)

// CodeMassAsForce: a sensor read as a mass. Its factor is 1/gₙ (kilograms
// typed as newtons); grams typed as newtons give 1000/gₙ, a newton reading
// "converted" with g gives gₙ: matchMassAsForce tries every decade.
var CodeMassAsForce = entry(CatalogueEntry{Code: "coil_force.mass_as_force", Level: Raw, Factor: 1 / StandardGravity,
	Cause:      "the force sensor was read as a mass (kg or g) and entered as newtons, or a reading in newtons was multiplied by g",
	Action:     "set the sensor to newtons, or multiply a reading in kilograms by g = 9.81 m/s² (grams: by 0.00981), once",
	Lookalikes: []string{"generic.decade_slip"}})

// zeroInterceptMin is the least intercept called a skipped zero, 0.05 N: a
// fourth of the smallest offset a skipped zero typically leaves (0.2–3 N)
// // common practice (PHYSICS.md §3a). Beyond that the intercept must be
// significant by Student's t for the run (tShape).
const zeroInterceptMin = 0.05 // N

func assessCoilForce(c map[string]Measurement, rs []siReading, tol Tolerance, plot bool) (Assessment, findings) {
	x := make([]float64, len(rs))
	y := make([]float64, len(rs))
	for i, r := range rs {
		x[i] = r.v("current")
		y[i] = r.v("force")
	}
	line, err := fit.Linear(x, y)
	if errors.Is(err, fit.ErrNoSpread) {
		return Assessment{Verdict: NeedData, Reason: "every reading is at the same current: take readings across the range"}, nil
	}
	if err != nil {
		return Assessment{Verdict: NeedData, Reason: err.Error()}, nil
	}

	// With few points the residual scatter can be small by chance; the
	// instruments' resolutions set a floor under both standard errors.
	uF := resolutionU(c["force_resolution"].Value)
	uI := resolutionU(c["current_resolution"].Value)
	uy := math.Hypot(uF, line.Slope*uI)
	// What the instruments allow one reading to scatter: resolution,
	// repeatability and the current reading's share.
	uAllowed := math.Hypot(uy, c["force_repeatability"].Value)
	slope, intercept := floorLine(line, x, uy)
	line.SlopeSE, line.InterceptSE = slope.Uncertainty, intercept.Uncertainty
	var sc scatter
	if len(x) > 2 {
		sc = scatter{chi2: line.ResidualSD * line.ResidualSD * float64(len(x)-2) / (uAllowed * uAllowed), nu: len(x) - 2}
	}

	N, B, L := c["turns"], c["gap_field"], c["segment_length"]
	pred := N.Value * B.Value * L.Value
	// N is exact; (u/NBL)² = (u_B/B)² + (u_L/L)² [pub: JCGM 100:2008 (GUM) §5.1.6].
	predicted := Measurement{Value: pred, Uncertainty: pred * math.Hypot(B.RelUncertainty(), L.RelUncertainty())}

	z, pct, v, extra := judgeScatter(slope, predicted, math.Max(uAllowed, uy)/math.Sqrt(line.Sxx), sc, tol)
	fitItem := BudgetItem{Input: "slope fit", RelU: slope.RelUncertainty()}
	items := []BudgetItem{fitItem,
		{Input: "gap field B", RelU: B.RelUncertainty()},
		{Input: "segment length L", RelU: L.RelUncertainty()}}
	if extra != nil {
		items[0].RelU = math.Sqrt(math.Max(0, fitItem.RelU*fitItem.RelU-extra.RelU*extra.RelU))
		items = append(items, *extra)
	}
	a := Assessment{
		Verdict: v, Measured: slope, Predicted: predicted, ResultUnit: "N/A", ResultName: "slope",
		Z: z, PercentDiff: pct, Fit: &line, FitX: "current", FitY: "force", Budget: budget(items...), scatter: sc,
	}
	a.Reason = fmt.Sprintf("slope %s vs %s predicted (%+.1f %%, z = %+.1f)",
		FormatMeasurement(slope.Value, slope.Uncertainty, "N/A"),
		FormatMeasurement(predicted.Value, predicted.Uncertainty, ""), pct, z)

	if plot {
		pts := make([]PlotPoint, len(rs))
		for i := range rs {
			pts[i] = PlotPoint{X: x[i], Y: y[i], UY: math.Max(uy, line.ResidualSD), ReadingID: rs[i].id}
		}
		p := linePlot("current I (A)", "force F (N)", pts, line.Intercept, line.Slope, pred, tol.GoodPercent)
		p.XValue, p.YValue = "current", "force"
		a.Plot = &p
	}

	var fs findings
	// One reading apart from the rest is named first; the causes that
	// concern the whole run are then looked for without it, so that one
	// slipped point is not read as a factor in every reading.
	cx, cy, cslope, cintercept, cfit := x, y, slope, intercept, line
	if o, ok := lineOutlier(x, y, line, uAllowed); ok {
		fs.addLinePoint(rs, y, o, "force", "N")
		cx, cy = without(x, o.i), without(y, o.i)
		if g, err := fit.Linear(cx, cy); err == nil {
			cfit = g
			cslope, cintercept = floorLine(g, cx, uy)
		}
	}
	rho := cslope.Value / pred
	uRel := math.Hypot(cslope.RelUncertainty(), predicted.RelUncertainty())
	if v != Consistent {
		fs.matchFactor(rho, uRel, "slope/N·B·L", CodeSignReversed, CodeLengthDoubled, CodeTurnsMismatch)
		fs.matchDecade(rho, uRel, "slope/N·B·L")
		fs.matchMassAsForce(rho, uRel, "slope/N·B·L")
		if rho > 1.03 && rho < 1.5 {
			theta := math.Acos(1/rho) * 180 / math.Pi
			fs.add(CodeFieldProbeTilted, fmt.Sprintf("slope/N·B·L = %.3f, as a probe tilted by about %.0f° would give", rho, theta), 0.6, true)
		}
	}
	// The intercept's standard error comes from the run's scatter (Student's
	// t for its degrees of freedom), or, when the scatter is smaller than
	// the instruments allow, from the instruments (normal): a three-reading
	// run then still shows a skipped zero.
	interceptU, interceptCrit := cintercept.Uncertainty, tShape(len(cx)-2)
	if floorI := uAllowed * math.Sqrt(1/float64(len(cx))+fit.Mean(cx)*fit.Mean(cx)/cfit.Sxx); cfit.InterceptSE < floorI {
		interceptU, interceptCrit = floorI, normalCritical(falseAlarm)
	}
	if math.Abs(cintercept.Value) > interceptCrit*interceptU && math.Abs(cintercept.Value) > zeroInterceptMin {
		fs.add(CodeSensorNotZeroed, fmt.Sprintf("intercept %s, expected 0; slope/N·B·L = %.3f",
			FormatMeasurement(cintercept.Value, cintercept.Uncertainty, "N"), rho), 0.95, true)
	}
	if len(cx) >= 5 {
		if q, err := fit.Polynomial(cx, cy, 2); err == nil && q.SE[2] > 0 {
			if t := q.Coef[2] / q.SE[2]; math.Abs(t) > tShape(len(cx)-3) && q.ResidualSD < 0.5*cfit.ResidualSD {
				fs.add(CodeNonlinear, fmt.Sprintf("a curvature term of %.3g N/A² is %.0f standard errors from zero", q.Coef[2], math.Abs(t)), 0.8, true)
			}
		}
	}
	lineShape(&fs, cx, cy, cfit, uy, uAllowed, "N")
	reportedPrediction(&fs, rs, pred, N.Value)
	return a, fs
}

// matchMassAsForce adds coil_force.mass_as_force when ρ is within tolerance
// of gₙ^±1 times a power of ten from 10⁻³ to 10³ (kilograms or grams typed
// as newtons, or newtons multiplied by g); ×1/gₙ·10 =
// 1.02 and ×gₙ/10 = 0.98 are left out, too close to 1 to tell from a good
// run. Where a decade slip matches too, both are listed (PHYSICS.md §3:
// close pairs are never picked silently).
func (fs *findings) matchMassAsForce(rho, uRel float64, what string) {
	if rho <= 0 {
		return
	}
	tol := math.Max(2*uRel, 0.02)
	for _, base := range []float64{1 / StandardGravity, StandardGravity} {
		k := math.Round(math.Log10(rho / base))
		f := base * math.Pow(10, k)
		if math.Abs(k) > 3 || math.Abs(math.Log(f)) < 0.1 {
			continue
		}
		if d := math.Abs(math.Log(rho / f)); d <= tol {
			how := "a reading in newtons multiplied by g"
			if base < 1 {
				how = map[float64]string{0: "kilograms typed as newtons", 3: "grams typed as newtons"}[k]
				if how == "" {
					how = "a mass typed as newtons"
				}
			}
			fs.add(CodeMassAsForce, fmt.Sprintf("%s ratio %.4g ≈ ×%.4g: %s (gₙ = 9.80665 m/s²)", what, rho, f, how), 1-0.5*d/tol, true)
		}
	}
}

// floorLine is a fit's slope and intercept with their standard errors never
// below what one reading's uncertainty uy gives: with few readings the
// residual scatter can be small by chance.
func floorLine(f fit.Line, x []float64, uy float64) (slope, intercept Measurement) {
	mx := fit.Mean(x)
	n := float64(len(x))
	slope = Measurement{Value: f.Slope, Uncertainty: math.Max(f.SlopeSE, uy/math.Sqrt(f.Sxx))}
	intercept = Measurement{Value: f.Intercept, Uncertainty: math.Max(f.InterceptSE, uy*math.Sqrt(1/n+mx*mx/f.Sxx))}
	return slope, intercept
}

// reportedPrediction compares the group's own N·B·L with the tool's.
func reportedPrediction(fs *findings, rs []siReading, pred, turns float64) {
	var ratios []float64
	for _, r := range rs {
		if r.has("reported_prediction") && pred != 0 {
			ratios = append(ratios, r.v("reported_prediction")/pred)
		}
	}
	if len(ratios) == 0 {
		return
	}
	rho := median(ratios)
	what := "the group's N·B·L / the tool's"
	fs.matchFactor(rho, 0.02, what, CodeBothSegments, CodeSignReversed)
	fs.matchDecade(rho, 0.02, what)
	if turns > 1 && math.Abs(math.Log(rho*turns)) < 0.03 {
		fs.add(CodeTurnsLeftOut, fmt.Sprintf("%s = %.4g ≈ 1/N with N = %g", what, rho, turns), 1, true)
	}
}
