package domain

import (
	"errors"
	"fmt"
	"math"
)

// CoilForce is the force on the one horizontal segment of a current-carrying
// coil that sits in a magnet's gap: F = N·B·L·I. Students read the force at
// several currents; the slope of F against I is compared with N·B·L.
var CoilForce = &Experiment{
	ID:          "coil_force",
	Title:       "force on a coil in a magnet gap",
	MinReadings: 3,
	Constants: []QuantitySpec{
		{Name: "turns", Label: "turns N", Dim: Dimensionless, Unit: "1", Default: 100,
			Min: 1, Max: 100000, Integer: true},
		// Fringing makes the effective length longer than the ruler's; 2 %
		// covers a ruler reading on a few centimetres // common practice.
		{Name: "segment_length", Label: "segment length L", Dim: Length, Unit: "cm", Default: 4.0, DefaultRelU: 0.02,
			Min: 0, MinExclusive: true, Max: 1, Hint: "longer than any bench coil: was it typed in cm with unit m?"},
		// Probe and gap non-uniformity give 2–5 % // common practice.
		{Name: "gap_field", Label: "gap field B", Dim: MagneticField, Unit: "T", Default: 0.120, DefaultRelU: 0.03,
			Min: 0, MinExclusive: true, Max: 1.5, Hint: "permanent magnets stay below about 1.45 T (from memory): was it in G or mT?"},
		{Name: "force_resolution", Label: "force sensor resolution", Dim: Force, Unit: "N", Default: 0.001,
			Min: 0, MinExclusive: true, Max: 1},
		{Name: "current_resolution", Label: "ammeter resolution", Dim: Current, Unit: "A", Default: 0.01,
			Min: 0, MinExclusive: true, Max: 1},
	},
	Values: []QuantitySpec{
		// Bench supplies for this set-up give at most a few amperes; 50 A
		// means a unit slip // common practice.
		{Name: "current", Label: "current I", Dim: Current, Unit: "A", Min: -50, Max: 50,
			Hint: "far above any coil supply: was it typed in mA with unit A?"},
		{Name: "force", Label: "force F", Dim: Force, Unit: "N", Min: -100, Max: 100,
			Hint: "far above what a coil segment feels: check the unit"},
	},
	assess: assessCoilForce,
}

func init() { register(CoilForce) }

// Thresholds for the sensor-not-zeroed diagnosis: an intercept beyond three
// standard errors and above 0.05 N, a tenth of the smallest offset a skipped
// zero typically leaves (0.2–3 N) // common practice (PHYSICS.md §3a).
const (
	zeroInterceptSigmas = 3.0
	zeroInterceptMin    = 0.05 // N
)

func assessCoilForce(c map[string]Measurement, rs []siReading, tol Tolerance) Assessment {
	x := make([]float64, len(rs))
	y := make([]float64, len(rs))
	for i, r := range rs {
		x[i] = r.values["current"].Value
		y[i] = r.values["force"].Value
	}
	fit, err := FitLine(x, y)
	if errors.Is(err, ErrNoSpread) {
		return Assessment{Verdict: NeedData, Reason: "every reading is at the same current: take readings across the range"}
	}
	if err != nil {
		return Assessment{Verdict: NeedData, Reason: err.Error()}
	}

	// With few points the residual scatter can be small by chance; the
	// instruments' resolutions set a floor under both standard errors.
	uF := resolutionU(c["force_resolution"].Value)
	uI := resolutionU(c["current_resolution"].Value)
	uy := math.Hypot(uF, fit.Slope*uI)
	mx := mean(x)
	n := float64(len(x))
	slope := Measurement{Value: fit.Slope, Uncertainty: math.Max(fit.SlopeSE, uy/math.Sqrt(fit.Sxx))}
	intercept := Measurement{Value: fit.Intercept, Uncertainty: math.Max(fit.InterceptSE, uy*math.Sqrt(1/n+mx*mx/fit.Sxx))}
	fit.SlopeSE, fit.InterceptSE = slope.Uncertainty, intercept.Uncertainty

	N, B, L := c["turns"], c["gap_field"], c["segment_length"]
	pred := N.Value * B.Value * L.Value
	// N is exact; (u/NBL)² = (u_B/B)² + (u_L/L)² [pub: JCGM 100:2008 (GUM) §5.1.6].
	predicted := Measurement{Value: pred, Uncertainty: pred * math.Hypot(B.RelUncertainty(), L.RelUncertainty())}

	z, pct, v := combine(slope, predicted, tol)
	a := Assessment{
		Verdict: v, Measured: slope, Predicted: predicted, ResultUnit: "N/A",
		Z: z, PercentDiff: pct, Fit: &fit, FitX: "current", FitY: "force",
	}
	a.Reason = fmt.Sprintf("slope %s vs %s predicted (%+.1f %%, z = %+.1f)",
		FormatMeasurement(slope.Value, slope.Uncertainty, "N/A"),
		FormatMeasurement(predicted.Value, predicted.Uncertainty, ""), pct, z)

	if v == Consistent && math.Abs(intercept.Value) > zeroInterceptSigmas*intercept.Uncertainty &&
		math.Abs(intercept.Value) > zeroInterceptMin {
		a.Verdict = Check
		a.Diagnoses = append(a.Diagnoses, Diagnosis{
			Code:  CodeSensorNotZeroed,
			Cause: "the force sensor was probably not zeroed before the run",
			Evidence: fmt.Sprintf("intercept %s, expected 0; the slope agrees (z = %+.1f)",
				FormatMeasurement(intercept.Value, intercept.Uncertainty, "N"), z),
			Action: "re-zero the force sensor with no current and retake the 0 A point",
		})
		a.Reason = fmt.Sprintf("intercept %s, expected ≈ 0: sensor not zeroed? %s",
			FormatMeasurement(intercept.Value, intercept.Uncertainty, "N"), a.Reason)
	}
	return a
}
