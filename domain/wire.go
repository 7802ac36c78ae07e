package domain

import (
	"cmp"
	"fmt"
	"math"
	"slices"

	"example.com/fluxroom/domain/fit"
)

// straightWire is the field of a long straight wire, B = μ0·I/(2π·r), with
// the finite-length factor ℓ/√(ℓ²+4r²) at the wire's middle
// [pub: any intro E&M text; PHYSICS.md §2(c)].
var straightWire = &Experiment{
	ID:          "straight_wire",
	Title:       "field of a long straight wire",
	MinReadings: 3,
	Constants: append(fieldConstants(),
		QuantitySpec{Name: "wire_length", Label: "wire length ℓ", Dim: Length, Unit: "m", Default: 1.0,
			Min: 0, MinExclusive: true, Max: 50},
		// The sensing element sits 1–5 mm inside the probe tip (from memory);
		// 0 until the bench knows its probe.
		QuantitySpec{Name: "sensor_offset", Label: "sensor depth inside the probe tip", Dim: Length, Unit: "mm", Default: 0,
			Min: 0, Max: 0.05},
		// Distances read with a ruler to the wire's centre: 1 mm // common practice.
		QuantitySpec{Name: "distance_uncertainty", Label: "distance uncertainty", Dim: Length, Unit: "mm", Default: 1,
			Min: 0, MinExclusive: true, Max: 0.05},
		// The ratio between the meter's two printed scales: an instrument
		// parameter of the bench, 3.16 on a 1–3.16–10 meter // common practice.
		QuantitySpec{Name: "scale_ratio", Label: "ratio of the meter's two scales", Dim: Dimensionless, Unit: "1", Default: 3.16,
			Min: 1, MinExclusive: true, Max: 10},
		// Straight-wire set-ups run 10–20 A and get hot // common practice.
		QuantitySpec{Name: "max_current", Label: "wire current limit", Dim: Current, Unit: "A", Default: 20,
			Min: 0, MinExclusive: true, Max: 200},
	),
	Values: []QuantitySpec{
		{Name: "current", Label: "current I", Dim: Current, Unit: "A", Min: -100, Max: 100,
			SafetyLimit: "max_current", Resolution: "current_resolution", Hint: "beyond any bench supply", Usual: [2]float64{1, 20},
			Caution: "The wire current is above the set-up's limit: the wire and leads get hot. Use a current-limited supply and switch off between readings."},
		{Name: "distance", Label: "distance r", Dim: Length, Unit: "cm", Min: 0, MinExclusive: true, Max: 2,
			Hint: "farther than any bench", Usual: [2]float64{0.005, 0.3}},
		{Name: "field", Label: "field B", Dim: MagneticField, Unit: "G", Min: -0.1, Max: 0.1,
			Hint: "far above a wire's field", Usual: [2]float64{1e-6, 1e-3}}, // 0.01–10 G (PHYSICS.md §2(c))
		{Name: "field_reversed", Label: "field with the current reversed", Dim: MagneticField, Unit: "G", Min: -0.1, Max: 0.1, Optional: true},
		{Name: "meter_range", Label: "meter range (full scale)", Dim: MagneticField, Unit: "G", Min: 0, MinExclusive: true, Max: 1, Optional: true},
		{Name: "reported_theory", Label: "the group's own B_theory", Dim: MagneticField, Unit: "G", Min: math.NaN(), Max: math.NaN(), Optional: true},
	},
}

func init() { register(straightWire) }

// Diagnosis codes of the straight-wire experiment. Append-only.
var (
	CodeWireBackground = entry(CatalogueEntry{Code: "straight_wire.background_not_removed", Level: Shape,
		Cause:  "a background field (the Earth's, the lab's) was not removed: ρ − 1 grows with distance",
		Action: "take each reading with the current both ways and enter both; the tool uses (B₊ − B₋)/2"})
	CodeReversalSign = entry(CatalogueEntry{Code: "straight_wire.reversal_sign_dropped", Level: Raw,
		Cause:  "the reading with the current reversed was entered without its minus sign",
		Action: "enter the reversed reading with the sign the meter shows"})
	CodeTipOffset = entry(CatalogueEntry{Code: "straight_wire.tip_offset", Level: Shape,
		Cause:  "distances were measured to the probe tip; the sensing element sits a few millimetres further in",
		Action: "add the sensor's depth to each distance (or set the bench's sensor depth)"})
	CodeWrongScale = entry(CatalogueEntry{Code: "straight_wire.wrong_scale", Level: Raw,
		Cause:      "the field was read on the meter's other printed scale",
		Action:     "on each range, read the scale that matches the range's full-scale value",
		Lookalikes: []string{"straight_wire.loop_formula"}})
	CodeWireLoopFormula = entry(CatalogueEntry{Code: "straight_wire.loop_formula", Level: Recomputation, Factor: math.Pi,
		Cause:  "the group's own B_theory uses the loop formula μ0I/2r instead of the wire's μ0I/2πr",
		Action: "B = μ0·I/(2π·r) for a long straight wire", Lookalikes: []string{"straight_wire.wrong_scale"}})
)

func assessStraightWire(c map[string]Measurement, rs []siReading, tol Tolerance, plot bool) (Assessment, findings) {
	ell, delta := c["wire_length"].Value, c["sensor_offset"].Value
	ur := c["distance_uncertainty"].Value
	pts := make([]fieldPoint, 0, len(rs))
	reversed, sameSign := 0, 0
	for _, r := range rs {
		I, rr, B := r.v("current"), r.v("distance")+delta, r.v("field")
		p := fieldPoint{measured: B, u: meterU(c, B), reading: r}
		if r.has("field_reversed") {
			br := r.v("field_reversed")
			p.measured = (B - br) / 2
			p.u = math.Hypot(meterU(c, B), meterU(c, br)) / 2
			reversed++
			if B*br > 0 {
				sameSign++
			}
		}
		p.theory = WireField(I, rr, ell)
		// d ln B/d ln r ≈ −1 for r ≪ ℓ.
		p.theoryRelU = ur / rr
		pts = append(pts, p)
	}
	a, fs, run, ok := assessFieldPoints(pts, 0, tol, "wire", "G", plot)
	if !ok {
		return a, fs
	}
	rho := run.rho.Value
	dist := make([]float64, len(run.pts))
	ratios := make([]float64, len(run.pts))
	for i, p := range run.pts {
		dist[i] = p.reading.v("distance")
		ratios[i] = p.measured / p.theory
	}
	if reversed >= 3 && sameSign*2 >= reversed {
		reversalSign(&fs, run.pts, rho)
	}
	if a.Verdict != Consistent {
		wireShape(&fs, run.pts, c, reversed == 0)
		wrongScale(&fs, run.pts, rho, run.rho.RelUncertainty(), c["scale_ratio"].Value)
		if fs.onlyPoints() {
			probeNotAligned(&fs, rho, ratios, dist)
		}
	}
	infinite := func(p fieldPoint) float64 {
		return Mu0 * p.reading.v("current") / (2 * math.Pi * p.reading.v("distance"))
	}
	reportedTheory(&fs, pts, []func(fieldPoint) float64{toolTheory, infinite}, CodeWireLoopFormula)
	return a, fs
}

// reversalSign checks whether the reversed readings lost their sign. Entered
// right, (B₊ − B₋)/2 follows the theory and (B₊ + B₋)/2 is the steady
// background; with the sign dropped it is the other way round.
func reversalSign(fs *findings, pts []fieldPoint, rho float64) {
	x := make([]float64, len(pts))
	y := make([]float64, len(pts))
	u := make([]float64, len(pts))
	for i, p := range pts {
		b, br := p.reading.v("field"), p.reading.v("field_reversed")
		x[i], y[i], u[i] = p.theory, (b+br)/2, p.u
	}
	alt, _, _, err := fit.Ratio(x, y, u)
	if err != nil {
		return
	}
	if math.Abs(alt-1) < 0.15 && math.Abs(rho-1) > 0.15 {
		fs.add(CodeReversalSign, fmt.Sprintf("(B₊ + B₋)/2 follows the theory (ratio %.3f) while (B₊ − B₋)/2 gives %.3f", alt, rho), 1, true)
	}
}

// WireField is B (T) at distance r (m) from the middle of a straight wire of
// length ell (m) carrying I (A).
func WireField(I, r, ell float64) float64 {
	return Mu0 * I / (2 * math.Pi * r) * ell / math.Sqrt(ell*ell+4*r*r)
}

// wireShape tells a background left in (B = b + ρ·B_theory, a constant
// offset) from distances taken to the probe tip (B = ρ·B_theory·r/(r+δ)):
// each model is fitted and kept when it explains most of what the plain
// ratio leaves [derived from PHYSICS.md §3(c)].
func wireShape(fs *findings, pts []fieldPoint, c map[string]Measurement, noReversal bool) {
	if len(pts) < 4 {
		return
	}
	x := make([]float64, len(pts))
	y := make([]float64, len(pts))
	r := make([]float64, len(pts))
	ib := make([]float64, len(pts))
	for i, p := range pts {
		x[i], y[i] = p.theory, p.measured
		r[i] = p.reading.v("distance") + c["sensor_offset"].Value
		if p.measured != 0 {
			ib[i] = p.reading.v("current") / p.measured
		}
	}
	u := make([]float64, len(pts))
	for i, p := range pts {
		u[i] = p.u
	}
	rho, _, _, _ := fit.Ratio(x, y, u)
	rss := func(pred func(i int) float64) float64 {
		var s float64
		for i := range y {
			d := (y[i] - pred(i)) / u[i]
			s += d * d
		}
		return s
	}
	rss0 := rss(func(i int) float64 { return rho * x[i] })
	bgFit, err1 := fit.Linear(x, y)
	rssBG := math.Inf(1)
	if err1 == nil {
		rssBG = rss(func(i int) float64 { return bgFit.Intercept + bgFit.Slope*x[i] })
	}
	// I/B = (2π/(ρ·μ0))·(r + δ) for r ≪ ℓ.
	tipFit, err2 := fit.Linear(r, ib)
	rssTip := math.Inf(1)
	var delta float64
	if err2 == nil && tipFit.Slope > 0 {
		delta = tipFit.Intercept / tipFit.Slope
		rhoTip := 2 * math.Pi / (Mu0 * tipFit.Slope)
		rssTip = rss(func(i int) float64 { return rhoTip * x[i] * r[i] / (r[i] + delta) })
	}
	better := func(v float64) bool { return v < 0.3*rss0 }
	bgOK := noReversal && err1 == nil && better(rssBG) && math.Abs(bgFit.Intercept) > 3*bgFit.InterceptSE
	tipOK := err2 == nil && better(rssTip) && delta > 0.3e-3 && delta < 20e-3
	if bgOK {
		score := 0.9
		if tipOK && rssTip < rssBG {
			score = 0.8
		}
		fs.add(CodeWireBackground, fmt.Sprintf("B = b + ρ·B_theory fits with b = %.3g ± %.2g G, a steady background", bgFit.Intercept*1e4, bgFit.InterceptSE*1e4), score, true)
	}
	if tipOK {
		score := 0.9
		if bgOK && rssBG < rssTip {
			score = 0.8
		}
		fs.add(CodeTipOffset, fmt.Sprintf("I/B against r crosses zero at r = −%.1f mm: the sensing element sits about %.1f mm beyond the measured distance", delta*1e3, delta*1e3), score, true)
	}
}

// wrongScale looks for readings off by the meter's scale ratio: on some
// ranges only when the range is recorded, or on all of them.
func wrongScale(fs *findings, pts []fieldPoint, rho, uRel, ratio float64) {
	byRange := map[float64][]float64{}
	for _, p := range pts {
		if p.reading.has("meter_range") {
			byRange[p.reading.v("meter_range")] = append(byRange[p.reading.v("meter_range")], p.measured/p.theory)
		}
	}
	if len(byRange) >= 2 {
		// Range-specific: one range off from the others by the scale ratio.
		// Look first at the range furthest from theory, the likely culprit,
		// so the answer never depends on map order.
		ranges := make([]float64, 0, len(byRange))
		for rg := range byRange {
			ranges = append(ranges, rg)
		}
		off := func(rg float64) float64 { return math.Abs(math.Log(math.Abs(median(byRange[rg])))) }
		slices.SortFunc(ranges, func(a, b float64) int {
			if c := cmp.Compare(off(b), off(a)); c != 0 {
				return c
			}
			return cmp.Compare(a, b)
		})
		for _, rg := range ranges {
			v := byRange[rg]
			m, others := median(v), nearOne(byRange, rg)
			for _, f := range []float64{ratio, 1 / ratio} {
				if math.Abs(math.Log(m/others/f)) < 0.05 {
					fs.add(CodeWrongScale, fmt.Sprintf("readings on the %.3g G range are ×%.3g of the other ranges'", rg*1e4, m/others), 1, true)
					return
				}
			}
		}
		return
	}
	tol := math.Max(2*uRel, 0.02)
	for _, f := range []float64{ratio, 1 / ratio} {
		if d := math.Abs(math.Log(math.Abs(rho) / f)); rho > 0 && d <= tol {
			fs.add(CodeWrongScale, fmt.Sprintf("B/B_theory = %.4g, the meter's scale ratio is %.3g", rho, ratio), 0.9-0.3*d/tol, true)
		}
	}
}

// nearOne is the median ratio of the ranges other than rg.
func nearOne(byRange map[float64][]float64, rg float64) float64 {
	var v []float64
	for k, r := range byRange {
		if k != rg {
			v = append(v, r...)
		}
	}
	if len(v) == 0 {
		return 1
	}
	return median(v)
}
