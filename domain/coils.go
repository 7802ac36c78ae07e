package domain

import (
	"fmt"
	"math"
)

// solenoid is the field on the axis of a finite solenoid:
// B(z) = (μ0nI/2)[(z+L/2)/√((z+L/2)²+R²) − (z−L/2)/√((z−L/2)²+R²)]
// [pub: any intro E&M text; PHYSICS.md §2(d)].
var solenoid = &Experiment{
	ID:          "solenoid",
	Title:       "field of a solenoid",
	MinReadings: 3,
	Constants: append(fieldConstants(),
		QuantitySpec{Name: "turns", Label: "turns N", Dim: Dimensionless, Unit: "1", Default: 500, Min: 1, Max: 1e6, Integer: true},
		QuantitySpec{Name: "length", Label: "length L", Dim: Length, Unit: "cm", Default: 15, DefaultRelU: 0.005,
			Min: 0, MinExclusive: true, Max: 5},
		QuantitySpec{Name: "radius", Label: "radius R", Dim: Length, Unit: "cm", Default: 2, DefaultRelU: 0.02,
			Min: 0, MinExclusive: true, Max: 1},
		// Air-core teaching solenoids are wound for a few amperes // common practice.
		QuantitySpec{Name: "max_current", Label: "current limit", Dim: Current, Unit: "A", Default: 3,
			Min: 0, MinExclusive: true, Max: 100},
	),
	Values: []QuantitySpec{
		{Name: "current", Label: "current I", Dim: Current, Unit: "A", Min: -100, Max: 100, SafetyLimit: "max_current", Resolution: "current_resolution",
			Caution: "The solenoid current is above its rating: the winding gets hot. Turn the supply down and switch off between readings."},
		// Above 0.1 T is impossible for an air core (PHYSICS.md §2(d)).
		{Name: "field", Label: "field B", Dim: MagneticField, Unit: "mT", Min: -0.1, Max: 0.1,
			Hint:  "above 0.1 T is impossible without iron",
			Usual: [2]float64{5e-5, 0.02}}, // 0.05–20 mT (PHYSICS.md §2(d))
		{Name: "position", Label: "position z from the centre", Dim: Length, Unit: "cm", Min: -5, Max: 5, Optional: true},
		{Name: "reported_theory", Label: "the group's own B_theory", Dim: MagneticField, Unit: "mT", Min: math.NaN(), Max: math.NaN(), Optional: true},
	},
}

// flatCoil is the field on the axis of a flat circular coil:
// B(z) = μ0NIR²/(2(R²+z²)^{3/2}) [pub: any intro E&M text; PHYSICS.md §2(e)].
var flatCoil = &Experiment{
	ID:          "flat_coil",
	Title:       "field of a flat circular coil",
	MinReadings: 3,
	Constants: append(fieldConstants(),
		QuantitySpec{Name: "turns", Label: "turns N", Dim: Dimensionless, Unit: "1", Default: 200, Min: 1, Max: 1e6, Integer: true},
		QuantitySpec{Name: "radius", Label: "radius R", Dim: Length, Unit: "cm", Default: 10.5, DefaultRelU: 0.01,
			Min: 0, MinExclusive: true, Max: 2},
		QuantitySpec{Name: "max_current", Label: "current limit", Dim: Current, Unit: "A", Default: 3,
			Min: 0, MinExclusive: true, Max: 100},
	),
	Values: []QuantitySpec{
		{Name: "current", Label: "current I", Dim: Current, Unit: "A", Min: -100, Max: 100, SafetyLimit: "max_current", Resolution: "current_resolution",
			Caution: "The coil current is above its rating: the winding gets hot. Turn the supply down and switch off between readings."},
		{Name: "field", Label: "field B", Dim: MagneticField, Unit: "mT", Min: -0.1, Max: 0.1,
			Hint:  "above 0.1 T is impossible for a teaching coil",
			Usual: [2]float64{1e-5, 0.01}}, // a few mT at the centre at a few A // common practice
		{Name: "position", Label: "position z from the centre", Dim: Length, Unit: "cm", Min: -10, Max: 10, Optional: true},
		{Name: "reported_theory", Label: "the group's own B_theory", Dim: MagneticField, Unit: "mT", Min: math.NaN(), Max: math.NaN(), Optional: true},
	},
}

func init() {
	register(solenoid)
	register(flatCoil)
}

// Diagnosis codes of the solenoid and flat-coil experiments. Append-only.
var (
	CodeProbeAtEnd = entry(CatalogueEntry{Code: "solenoid.probe_at_end", Level: Raw,
		Cause:  "the probe sits at the end of the solenoid, not its centre",
		Action: "push the probe to the middle of the solenoid (or enter its position)"})
	CodeTotalTurnsAsN = entry(CatalogueEntry{Code: "solenoid.total_turns_as_n", Level: Recomputation,
		Cause:  "the group's own B_theory uses the total turns N where the turns per metre n = N/L belong",
		Action: "n = N/L in metres"})
	CodeNPerCm = entry(CatalogueEntry{Code: "solenoid.n_per_cm", Level: Recomputation, Factor: 0.01,
		Cause:  "the group's own B_theory uses n in turns per centimetre as if per metre",
		Action: "n in turns per metre"})
	CodeCoilDiameterAsRadius = entry(CatalogueEntry{Code: "flat_coil.diameter_as_radius", Level: Raw,
		Cause:  "the coil's diameter was entered as its radius R",
		Action: "R is half the coil's diameter"})
	CodeCoilWireFormula = entry(CatalogueEntry{Code: "flat_coil.wire_formula", Level: Recomputation, Factor: 1 / math.Pi,
		Cause:  "the group's own B_theory uses the straight-wire formula μ0NI/2πR for the coil",
		Action: "B = μ0·N·I/(2R) at the centre of a flat coil"})
	CodeCoilDiameterInFormula = entry(CatalogueEntry{Code: "flat_coil.diameter_in_formula", Level: Recomputation, Factor: 0.5,
		Cause:  "the group's own B_theory uses the coil's diameter where R belongs",
		Action: "R is half the coil's diameter"})
)

// SolenoidField is B (T) on the axis of a solenoid of N turns, length L and
// radius R (m) carrying I (A), at z (m) from its centre.
func SolenoidField(N, L, R, I, z float64) float64 {
	n := N / L
	a, b := z+L/2, z-L/2
	return Mu0 * n * I / 2 * (a/math.Hypot(a, R) - b/math.Hypot(b, R))
}

// CoilField is B (T) on the axis of a flat coil of N turns and radius R (m)
// carrying I (A), at z (m) from its centre.
func CoilField(N, R, I, z float64) float64 {
	return Mu0 * N * I * R * R / (2 * math.Pow(R*R+z*z, 1.5))
}

func coilPoints(c map[string]Measurement, rs []siReading, theory func(I, z float64) float64) []fieldPoint {
	pts := make([]fieldPoint, 0, len(rs))
	for _, r := range rs {
		var z float64
		if r.has("position") {
			z = r.v("position")
		}
		B := r.v("field")
		pts = append(pts, fieldPoint{measured: B, u: meterU(c, B), theory: theory(r.v("current"), z), reading: r})
	}
	return pts
}

func assessSolenoid(c map[string]Measurement, rs []siReading, tol Tolerance, plot bool) (Assessment, findings) {
	N, L, R := c["turns"].Value, c["length"], c["radius"]
	pts := coilPoints(c, rs, func(I, z float64) float64 { return SolenoidField(N, L.Value, R.Value, I, z) })
	// Near the centre B ∝ 1/L to first order; R enters only the small
	// end correction, so L dominates the model's uncertainty.
	a, fs, run, ok := assessFieldPoints(pts, L.RelUncertainty(), tol, "solenoid", "mT", plot)
	if !ok {
		return a, fs
	}
	rho := run.rho.Value
	if a.Verdict != Consistent {
		end := SolenoidField(N, L.Value, R.Value, 1, L.Value/2) / SolenoidField(N, L.Value, R.Value, 1, 0)
		tol := math.Max(2*run.rho.RelUncertainty(), 0.03)
		if d := math.Abs(math.Log(rho / end)); rho > 0 && d <= tol {
			fs.add(CodeProbeAtEnd, fmt.Sprintf("B/B_theory = %.3f, and B(end)/B(centre) = %.3f for this solenoid", rho, end), 1-0.4*d/tol, true)
		}
		if fs.onlyPoints() {
			probeNotAligned(&fs, rho, nil, nil)
		}
	}
	// The group's μ0·N·I against the tool's μ0·(N/L)·I·c, with c the
	// finite-length factor at the centre, gives L/c (L in metres).
	// Groups use the ideal μ0·n·I as often as the finite formula.
	ideal := func(p fieldPoint) float64 { return Mu0 * N / L.Value * p.reading.v("current") }
	if _, ok := reportedTheory(&fs, pts, []func(fieldPoint) float64{toolTheory, ideal}, CodeNPerCm); ok {
		var ratios []float64
		for _, p := range pts {
			if p.reading.has("reported_theory") {
				ratios = append(ratios, p.reading.v("reported_theory")/ideal(p))
			}
		}
		if ratio := median(ratios); math.Abs(math.Log(ratio/L.Value)) < 0.03 {
			fs.add(CodeTotalTurnsAsN, fmt.Sprintf("the group's B_theory / μ0·n·I = %.3g ≈ L = %.3g m", ratio, L.Value), 1, true)
		}
	}
	return a, fs
}

func assessFlatCoil(c map[string]Measurement, rs []siReading, tol Tolerance, plot bool) (Assessment, findings) {
	N, R := c["turns"].Value, c["radius"]
	pts := coilPoints(c, rs, func(I, z float64) float64 { return CoilField(N, R.Value, I, z) })
	a, fs, run, ok := assessFieldPoints(pts, R.RelUncertainty(), tol, "flat coil", "mT", plot)
	if !ok {
		return a, fs
	}
	rho := run.rho.Value
	if a.Verdict != Consistent {
		// If R is really the diameter, the true theory uses R/2.
		var f []float64
		for _, p := range run.pts {
			var z float64
			if p.reading.has("position") {
				z = p.reading.v("position")
			}
			f = append(f, CoilField(N, R.Value/2, p.reading.v("current"), z)/p.theory)
		}
		want := median(f)
		tol := math.Max(2*run.rho.RelUncertainty(), 0.03)
		if d := math.Abs(math.Log(rho / want)); rho > 0 && d <= tol {
			// R/2 also explains why the ratio changes along the axis, which
			// can make the reading farthest out look like an outlier.
			fs.drop(CodeOutlierPoint)
			fs.add(CodeCoilDiameterAsRadius, fmt.Sprintf("B/B_theory = %.3f, and R/2 would give ×%.3f", rho, want), 1-0.4*d/tol, true)
		}
		if fs.onlyPoints() {
			probeNotAligned(&fs, rho, nil, nil)
		}
	}
	reportedTheory(&fs, pts, []func(fieldPoint) float64{toolTheory}, CodeCoilWireFormula, CodeCoilDiameterInFormula)
	return a, fs
}
