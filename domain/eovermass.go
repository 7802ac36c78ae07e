package domain

import (
	"cmp"
	"fmt"
	"math"
	"slices"

	"example.com/fluxroom/domain/fit"
)

// eOverM measures the electron's charge-to-mass ratio from a beam bent into a
// circle by a Helmholtz coil pair: eV = ½mv², evB = mv²/r, so
// e/m = 2V/(B²r²) with B = k·I [pub: any intro E&M text; PHYSICS.md §2(b)].
// Students read the beam's diameter; the tool halves it.
var eOverM = &Experiment{
	ID:          "e_over_m",
	Title:       "charge-to-mass ratio of the electron",
	MinReadings: 1,
	Constants: []QuantitySpec{
		{Name: "coil_turns", Label: "turns per coil N", Dim: Dimensionless, Unit: "1", Default: 130,
			Min: 1, Max: 10000, Integer: true},
		// A tape reading of the mean coil radius is good to about 1 % // common practice.
		{Name: "coil_radius", Label: "coil radius R", Dim: Length, Unit: "cm", Default: 15.0, DefaultRelU: 0.01,
			Min: 0, MinExclusive: true, Max: 1, Hint: "larger than any teaching coil pair",
			Usual: [2]float64{0.05, 0.25}}, // common practice
		// 0 means "compute k from N and R with the Helmholtz formula".
		{Name: "coil_constant", Label: "coil constant k", Dim: CoilConstant, Unit: "mT/A", Default: 0, DefaultRelU: 0.01,
			Min: 0, Max: 0.1, Hint: "far above a Helmholtz pair's",
			Usual: [2]float64{1e-4, 5e-3}}, // 0.78 mT/A for 130 turns of 15 cm (PHYSICS.md §2(b))
		// The diameter is read to ±1–2 mm against a scale behind the bulb
		// // common practice (PHYSICS.md §2(b)).
		{Name: "diameter_uncertainty", Label: "diameter reading uncertainty", Dim: Length, Unit: "mm", Default: 1,
			Min: 0, MinExclusive: true, Max: 0.05},
		{Name: "voltage_resolution", Label: "voltmeter resolution", Dim: Voltage, Unit: "V", Default: 1,
			Min: 0, MinExclusive: true, Max: 100},
		{Name: "current_resolution", Label: "ammeter resolution", Dim: Current, Unit: "A", Default: 0.01,
			Min: 0, MinExclusive: true, Max: 1},
		// Supplies give 150–300 V for these tubes // common practice.
		{Name: "max_anode_voltage", Label: "anode voltage limit", Dim: Voltage, Unit: "V", Default: 300,
			Min: 0, MinExclusive: true, Max: 5000},
		// More than 6.3 V destroys the filament // common practice.
		{Name: "max_heater_voltage", Label: "heater voltage limit", Dim: Voltage, Unit: "V", Default: 6.3,
			Min: 0, MinExclusive: true, Max: 50},
		// Coil pairs are rated about 1.5–3.5 A // common practice.
		{Name: "max_coil_current", Label: "coil current limit", Dim: Current, Unit: "A", Default: 2.5,
			Min: 0, MinExclusive: true, Max: 20},
	},
	Values: []QuantitySpec{
		{Name: "anode_voltage", Label: "anode voltage V", Dim: Voltage, Unit: "V", Min: 0, MinExclusive: true, Max: 2000,
			Hint: "beyond any beam tube supply", Usual: [2]float64{100, 300}, SafetyLimit: "max_anode_voltage", Resolution: "voltage_resolution",
			Caution: "The anode supply is above the tube's limit: switch it off. The tube runs above extra-low voltage (IEC 61140): change wiring only with the supplies off and after the instructor's check."},
		{Name: "coil_current", Label: "coil current I", Dim: Current, Unit: "A", Min: -10, Max: 10,
			Hint: "beyond any coil pair's rating", Usual: [2]float64{0.5, 2}, SafetyLimit: "max_coil_current", Resolution: "current_resolution",
			Caution: "Coil current above the pair's rating overheats the coils: turn it down."},
		// The bulb is about 16 cm across, so no orbit is wider (from memory).
		{Name: "beam_diameter", Label: "beam diameter d", Dim: Length, Unit: "cm", Min: 0, MinExclusive: true, Max: 0.16,
			Hint:  "wider than the bulb (about 16 cm, from memory)",
			Usual: [2]float64{0.03, 0.12}}, // r 1.5–6 cm (from memory, PHYSICS.md §2(b))
		{Name: "heater_voltage", Label: "heater voltage", Dim: Voltage, Unit: "V", Min: 0, Max: 100, Optional: true,
			SafetyLimit: "max_heater_voltage",
			Caution:     "The heater is above its limit: turn it down at once, more than 6.3 V destroys the filament. The tube is evacuated glass: handle it gently."},
		{Name: "reported_e_over_m", Label: "the group's own e/m", Dim: ChargeToMassRatio, Unit: "C/kg",
			Min: math.NaN(), Max: math.NaN(), Optional: true},
	},
}

func init() { register(eOverM) }

// Diagnosis codes of the e/m experiment. Append-only.
var (
	CodeRadiusEntered = entry(CatalogueEntry{Code: "e_over_m.radius_entered", Level: Raw, Factor: 4,
		Cause:  "the beam's radius was entered where its diameter is asked (d about half the expected)",
		Action: "enter the full diameter of the circle; the tool halves it"})
	CodeHeaterAsAnode = entry(CatalogueEntry{Code: "e_over_m.heater_as_anode", Level: Raw,
		Cause:  "the heater voltage was entered as the anode voltage",
		Action: "enter the accelerating (anode) voltage, 150–300 V, not the 6.3 V heater"})
	CodeKSingleLoop = entry(CatalogueEntry{Code: "e_over_m.k_single_loop", Level: Raw, Factor: 2.048,
		Cause:  "the bench's coil constant k was worked out with the single-loop formula μ0N/2R instead of the Helmholtz pair's",
		Action: "use k = (4/5)^{3/2}·μ0·N/R, or leave k at 0 so the tool computes it"})
	CodeKNoHelmholtzFactor = entry(CatalogueEntry{Code: "e_over_m.k_without_helmholtz_factor", Level: Raw, Factor: 0.512,
		Cause:  "the bench's coil constant k leaves out the (4/5)^{3/2} factor",
		Action: "use k = (4/5)^{3/2}·μ0·N/R, or leave k at 0 so the tool computes it"})
	CodeBackgroundAxial = entry(CatalogueEntry{Code: "e_over_m.background_field", Level: Shape,
		Cause:  "a background field along the coil axis (the Earth's, or nearby iron) adds to the coils' field",
		Action: "take each point with the current both ways and average, or turn the apparatus to face magnetic east–west"})
	CodeLargeOrbitsLow = entry(CatalogueEntry{Code: "e_over_m.large_orbits_low", Level: Shape,
		Cause:  "large orbits read e/m low: the coils' field weakens away from the centre",
		Action: "use orbits between about 3 and 5 cm radius"})
	CodeBeamTilt = entry(CatalogueEntry{Code: "e_over_m.beam_tilt", Level: Raw,
		Cause:  "the beam is not perpendicular to the field: a helix reads e/m high (×1/cos²δ)",
		Action: "turn the tube in its mount until the beam closes on itself in a flat circle"})
	CodeDiameterAsRadius = entry(CatalogueEntry{Code: "e_over_m.diameter_as_radius", Level: Recomputation, Factor: 0.25,
		Cause:  "the group's own e/m uses the diameter where the radius belongs",
		Action: "use r = d/2 in e/m = 2V/(B²r²)", Lookalikes: []string{"e_over_m.two_n"}})
	CodeTwoN = entry(CatalogueEntry{Code: "e_over_m.two_n", Level: Recomputation, Factor: 0.25,
		Cause:  "the group's own B counts the turns of both coils (2N) in the Helmholtz formula",
		Action: "N is the turns of one coil in B = (4/5)^{3/2}·μ0·N·I/R", Lookalikes: []string{"e_over_m.diameter_as_radius"}})
	CodeRadiusHalvedTwice = entry(CatalogueEntry{Code: "e_over_m.radius_halved_twice", Level: Recomputation, Factor: 4,
		Cause:  "the group's own e/m halves the diameter twice",
		Action: "r = d/2 once"})
	CodeSingleLoop = entry(CatalogueEntry{Code: "e_over_m.single_loop", Level: Recomputation, Factor: 2.048,
		Cause:  "the group's own B uses the single-loop formula μ0NI/2R instead of the Helmholtz pair's",
		Action: "use B = (4/5)^{3/2}·μ0·N·I/R", Lookalikes: []string{"e_over_m.extra_factor_two"}})
	CodeExtraFactorTwo = entry(CatalogueEntry{Code: "e_over_m.extra_factor_two", Level: Recomputation, Factor: 2,
		Cause:  "a stray factor of 2 in the group's formula (for example 4V/B²r²)",
		Action: "e/m = 2V/(B²r²)", Lookalikes: []string{"e_over_m.single_loop"}})
	CodeFactorTwoDropped = entry(CatalogueEntry{Code: "e_over_m.factor_two_dropped", Level: Recomputation, Factor: 0.5,
		Cause:  "the group's formula drops the 2 of e/m = 2V/(B²r²)",
		Action: "e/m = 2V/(B²r²)"})
	CodeHelmholtzDropped = entry(CatalogueEntry{Code: "e_over_m.helmholtz_factor_dropped", Level: Recomputation, Factor: 0.512,
		Cause:  "the group's own B leaves out the (4/5)^{3/2} factor",
		Action: "use B = (4/5)^{3/2}·μ0·N·I/R"})
	CodeRInCm = entry(CatalogueEntry{Code: "e_over_m.r_in_cm", Level: Recomputation, Factor: 1e-4,
		Cause:  "the group's own e/m uses r in centimetres as if metres",
		Action: "convert r to metres before squaring"})
	CodeGaussAsTesla = entry(CatalogueEntry{Code: "e_over_m.gauss_as_tesla", Level: Recomputation, Factor: 1e-8,
		Cause:  "the group's own e/m uses B in gauss as if tesla",
		Action: "1 G = 10⁻⁴ T"})
	CodeMilliteslaAsTesla = entry(CatalogueEntry{Code: "e_over_m.millitesla_as_tesla", Level: Recomputation, Factor: 1e-6,
		Cause:  "the group's own e/m uses B in millitesla as if tesla",
		Action: "1 mT = 10⁻³ T"})
	CodeMu0Without4Pi = entry(CatalogueEntry{Code: "e_over_m.mu0_without_4pi", Level: Recomputation, Factor: 16 * math.Pi * math.Pi,
		Cause:  "the group's own B uses μ0 = 10⁻⁷ without the 4π",
		Action: "μ0 = 4π·10⁻⁷ N/A²"})
	CodeHeaterInFormula = entry(CatalogueEntry{Code: "e_over_m.heater_in_formula", Level: Recomputation,
		Cause:  "the group's own e/m uses the heater voltage instead of the anode voltage",
		Action: "V in e/m = 2V/(B²r²) is the accelerating voltage"})
)

// coilConstant returns k (T/A) with its standard uncertainty: the bench's
// value when set, else the Helmholtz formula from N and R.
func coilConstant(c map[string]Measurement) Measurement {
	if k := c["coil_constant"]; k.Value > 0 {
		return k
	}
	N, R := c["coil_turns"].Value, c["coil_radius"]
	k := HelmholtzFactor * Mu0 * N / R.Value
	// N is exact; μ0 is known to 2e-10; u_k/k = u_R/R.
	return Measurement{Value: k, Uncertainty: k * R.RelUncertainty()}
}

func assessChargeToMass(c map[string]Measurement, rs []siReading, tol Tolerance, plot bool) (Assessment, findings) {
	k := coilConstant(c)
	uV := resolutionU(c["voltage_resolution"].Value)
	uI := resolutionU(c["current_resolution"].Value)
	ud := c["diameter_uncertainty"].Value
	n := len(rs)
	em := make([]float64, n)
	uem := make([]float64, n)
	radius := make([]float64, n)
	var sumW, sumWX float64
	var relV, relI, relR float64
	for i, r := range rs {
		V, I, d := r.v("anode_voltage"), math.Abs(r.v("coil_current")), r.v("beam_diameter")
		rad := d / 2
		B := k.Value * I
		radius[i] = rad
		if B == 0 {
			return Assessment{Verdict: NeedData, Reason: fmt.Sprintf("reading %d has no coil current, so no field", i+1)}, nil
		}
		em[i] = 2 * V / (B * B * rad * rad)
		// (u/(e/m))² = (u_V/V)² + 4(u_I/I)² + 4(u_r/r)², k's share added
		// once below as it is common to every reading [pub: JCGM 100:2008 §5.1.6].
		a, b, cc := uV/V, 2*uI/I, 2*(ud/2)/rad
		uem[i] = em[i] * math.Sqrt(a*a+b*b+cc*cc)
		w := 1 / (uem[i] * uem[i])
		sumW += w
		sumWX += w * em[i]
		relV, relI, relR = relV+a/float64(n), relI+b/float64(n), relR+cc/float64(n)
	}
	meanEM := sumWX / sumW
	uInstr := math.Sqrt(1 / sumW)
	uRand := uInstr
	var sc scatter
	if n > 1 {
		var chi2 float64
		for i := range em {
			d := (em[i] - meanEM) / uem[i]
			chi2 += d * d
		}
		sc = scatter{chi2: chi2, nu: n - 1}
		if s := sc.ratio(); s > 1 {
			uRand *= math.Sqrt(s)
		}
	}
	relK := 2 * k.RelUncertainty()
	measured := Measurement{Value: meanEM, Uncertainty: math.Hypot(uRand, meanEM*relK)}
	predicted := Measurement{Value: ElectronChargeToMass}
	z, pct, v, extra := judgeScatter(measured, predicted, math.Hypot(uInstr, meanEM*relK), sc, tol)
	items := []BudgetItem{
		{Input: "beam diameter d", RelU: relR / math.Sqrt(float64(n))},
		{Input: "anode voltage V", RelU: relV / math.Sqrt(float64(n))},
		{Input: "coil current I", RelU: relI / math.Sqrt(float64(n))},
		{Input: "coil constant k", RelU: relK},
	}
	if extra != nil {
		items = append(items, *extra)
	}
	a := Assessment{
		Verdict: v, Measured: measured, Predicted: predicted, ResultUnit: "C/kg", ResultName: "e/m",
		Z: z, PercentDiff: pct, Budget: budget(items...), scatter: sc,
	}
	a.Reason = fmt.Sprintf("e/m %s vs %.5g C/kg (CODATA 2022) (%+.1f %%, z = %+.1f), %d readings",
		FormatMeasurement(measured.Value, measured.Uncertainty, "C/kg"), ElectronChargeToMass, pct, z, n)

	if plot {
		pts := make([]PlotPoint, n)
		for i := range rs {
			pts[i] = PlotPoint{X: radius[i], Y: em[i], UY: uem[i], ReadingID: rs[i].id}
		}
		lo, hi := minOf(radius)*0.9, maxOf(radius)*1.1
		flat := func(v float64) []XY { return []XY{{lo, v}, {hi, v}} }
		a.Plot = &Plot{XLabel: "orbit radius r (m)", YLabel: "e/m (C/kg)", XValue: "beam_diameter", Points: pts, Fit: flat(meanEM),
			Theory: flat(ElectronChargeToMass), BandLow: flat(ElectronChargeToMass * (1 - tol.GoodPercent/100)),
			BandHigh: flat(ElectronChargeToMass * (1 + tol.GoodPercent/100))}
	}

	var fs findings
	// One reading apart from the rest is named first; the causes that
	// concern the whole run are then looked for without it, so that one
	// slipped value is not read as a factor in every reading.
	rho, uRel := meanEM/ElectronChargeToMass, measured.RelUncertainty()
	crs, cem, cuem, cradius := rs, em, uem, radius
	if i := chargeToMassOutlier(&fs, rs, em, uem); i >= 0 {
		crs, cem, cuem, cradius = without(rs, i), without(em, i), without(uem, i), without(radius, i)
		var w, wx float64
		for j := range cem {
			w, wx = w+1/(cuem[j]*cuem[j]), wx+cem[j]/(cuem[j]*cuem[j])
		}
		rho, uRel = wx/w/ElectronChargeToMass, math.Hypot(math.Sqrt(1/w)/(wx/w), relK)
	}
	var volts []float64
	for _, r := range crs {
		volts = append(volts, r.v("anode_voltage"))
	}
	switch {
	case median(volts) < 20:
		// Tube anodes run at 100–300 V (from memory); a few volts is the heater.
		fs.add(CodeHeaterAsAnode, fmt.Sprintf("anode voltage %.3g V, where tubes run at 100–300 V", median(volts)), 1, true)
	case v != Consistent:
		before := len(fs)
		fs.matchFactor(rho, uRel, "e/m / CODATA", CodeRadiusEntered, CodeKSingleLoop, CodeKNoHelmholtzFactor)
		if len(fs) == before {
			fs.matchDecade(rho, uRel, "e/m / CODATA")
		}
		if rho > 1.02 && rho < 1.25 {
			fs.add(CodeBeamTilt, fmt.Sprintf("e/m / CODATA = %.3f, as a beam tilted by about %.0f° would give", rho, math.Acos(math.Sqrt(1/rho))*180/math.Pi), 0.5, true)
		}
	}
	background := timeAndDirection(&fs, crs, cem, cuem, k.Value, v)
	if t, crit, ok := largeOrbits(crs, cradius, cem, cuem); ok && t < -crit && (maxOf(cradius)-minOf(cradius)) > 0.01 {
		fs.add(CodeLargeOrbitsLow, fmt.Sprintf("e/m falls as the orbit grows (t = %.1f over r = %.1f–%.1f cm)", t, 100*minOf(cradius), 100*maxOf(cradius)), 0.8, true)
	}
	reportedChargeToMass(&fs, rs, em)
	a.Notes = linearForms(rs, k.Value)
	if background != "" {
		// The background explains the run's scatter, and the pairs
		// average it out: no scatter finding.
		a.Notes, a.scatter = append(a.Notes, background), scatter{}
	}
	return a, fs
}

// largeOrbits fits e/m = a + b·r² (+ c·sign(I) when the run has both
// directions, so a background does not blur it) with the readings' known
// uncertainties, and returns b's z and its threshold (weightedModel). The
// coils' field falls off as r² away from the centre to first order, so a
// real loss shows in b [derived from PHYSICS.md §2(b)].
func largeOrbits(rs []siReading, radius, em, uem []float64) (z, threshold float64, ok bool) {
	n := len(rs)
	if n < 5 {
		return 0, 0, false
	}
	one, r2 := make([]float64, n), make([]float64, n)
	for i := range rs {
		one[i], r2[i] = 1, radius[i]*radius[i]
	}
	dir, pos, neg := directions(rs)
	cols := [][]float64{one, r2}
	if pos >= 2 && neg >= 2 && n >= 6 {
		cols = append(cols, dir)
	}
	coef, se, crit, err := weightedModel(cols, em, uem)
	if err != nil || !(se[1] > 0) {
		return 0, 0, false
	}
	return coef[1] / se[1], crit, true
}

// chargeToMassOutlier looks for one reading whose e/m stands apart from the
// others' and names the value whose slipped decimal explains it: e/m =
// 2V/(k·I·d/2)² moves ×10^j with V typed ×10^j, and ×10^(−2j) with I or d
// typed ×10^j [derived from PHYSICS.md §2(b)]. Between I and d, the one
// whose corrected value falls among the others' values is named. It returns
// the reading's index, or -1 when none stands apart.
func chargeToMassOutlier(fs *findings, rs []siReading, em, uem []float64) int {
	relU := make([]float64, len(em))
	for i := range em {
		relU[i] = uem[i] / em[i]
	}
	o, ok := loneOutlier(em, relU)
	if !ok {
		return -1
	}
	r := rs[o.i]
	tol := slipTolerance(o.sigma)
	type slip struct {
		name, label, unit string
		power             float64 // e/m ∝ value^power
	}
	best, bestMiss := -1.0, math.Inf(1)
	var bestSlip slip
	for _, s := range []slip{{"anode_voltage", "anode voltage", "V", 1}, {"coil_current", "coil current", "A", -2}, {"beam_diameter", "beam diameter", "m", -2}} {
		// The factor the value was typed with, if e/m's factor came from it.
		f, ok := slipFactor(math.Pow(o.factor, 1/s.power), tol/math.Abs(s.power))
		if !ok {
			continue
		}
		var others []float64
		for j, x := range rs {
			if j != o.i {
				others = append(others, math.Abs(x.v(s.name)))
			}
		}
		// How far the corrected value sits from the others' middle, in
		// logarithms: the slipped value comes back among them.
		miss := math.Abs(math.Log(math.Abs(r.v(s.name)) / f / median(others)))
		if miss < bestMiss {
			best, bestMiss, bestSlip = f, miss, s
		}
	}
	if best > 0 {
		v := math.Abs(r.v(bestSlip.name))
		fs.addPoint(CodeDecimalSlipPoint, r, fmt.Sprintf("reading #%d: e/m %.3g C/kg, ×%.3g the others' %.4g; its %s %.4g %s looks typed ×%g (%.4g %s would fit)",
			r.seq, em[o.i], o.factor, o.want, bestSlip.label, v, bestSlip.unit, best, v/best, bestSlip.unit), 0.9)
		return o.i
	}
	if !o.restBeyond {
		fs.addPoint(CodeOutlierPoint, r, fmt.Sprintf("reading #%d: e/m %.3g C/kg, ×%.3g the others' %.4g (%.0f standard uncertainties apart)",
			r.seq, em[o.i], o.factor, o.want, math.Abs(o.z)), 0.75)
	}
	return o.i
}

// linearForms fits the experiment's two straight-line forms where the
// readings allow [derived from PHYSICS.md §2(b)]: r² against V at one current
// (slope 2/((e/m)·B²)) and 1/r against I at one voltage (slope
// k·√((e/m)/2V); its intercept is a background field along the axis).
func linearForms(rs []siReading, k float64) []string {
	// Readings grouped by their rounded current (then voltage): each key
	// worked out once, the keys sorted with the readings' places, the
	// readings copied in that order and walked run by run, instead of a
	// map of lists grown reading by reading, on a path taken after every
	// reading.
	type keyed struct {
		key float64
		i   int
	}
	keys := make([]keyed, 0, len(rs))
	sorted := make([]siReading, 0, len(rs))
	x, y := make([]float64, len(rs)), make([]float64, len(rs))
	groups := func(keep func(siReading) bool, key func(siReading) float64, each func(key float64, g []siReading)) {
		keys, sorted = keys[:0], sorted[:0]
		for i, r := range rs {
			if keep(r) {
				keys = append(keys, keyed{key(r), i})
			}
		}
		slices.SortStableFunc(keys, func(a, b keyed) int { return cmp.Compare(a.key, b.key) })
		for _, k := range keys {
			sorted = append(sorted, rs[k.i])
		}
		for i := 0; i < len(sorted); {
			j := i + 1 // at least one: a NaN key equals nothing
			for j < len(sorted) && keys[j].key == keys[i].key {
				j++
			}
			each(keys[i].key, sorted[i:j])
			i = j
		}
	}
	var notes []string
	groups(func(siReading) bool { return true }, func(r siReading) float64 { return math.Round(r.v("coil_current")*20) / 20 },
		func(I float64, g []siReading) {
			if len(g) < 3 {
				return
			}
			x, y := x[:len(g)], y[:len(g)]
			for i, r := range g {
				x[i] = r.v("anode_voltage")
				rad := r.v("beam_diameter") / 2
				y[i] = rad * rad
			}
			f, err := fit.Origin(x, y)
			if err != nil || f.Slope <= 0 {
				return
			}
			B := k * math.Abs(I)
			em := 2 / (f.Slope * B * B)
			notes = append(notes, fmt.Sprintf("r² against V at %.2f A (%d points): e/m %s", I, len(g), FormatMeasurement(em, em*f.SlopeSE/f.Slope, "C/kg")))
		})
	groups(func(r siReading) bool { return r.v("coil_current") > 0 }, func(r siReading) float64 { return math.Round(r.v("anode_voltage")/10) * 10 },
		func(V float64, g []siReading) {
			if len(g) < 3 {
				return
			}
			x, y := x[:len(g)], y[:len(g)]
			for i, r := range g {
				x[i] = r.v("coil_current")
				y[i] = 2 / r.v("beam_diameter")
			}
			f, err := fit.Linear(x, y)
			if err != nil || f.Slope <= 0 {
				return
			}
			s := f.Slope / k
			em := 2 * V * s * s
			note := fmt.Sprintf("1/r against I at %.0f V (%d points): e/m %s", V, len(g), FormatMeasurement(em, 2*em*f.SlopeSE/f.Slope, "C/kg"))
			if f.InterceptSE > 0 {
				note += fmt.Sprintf(", background along the axis %.0f ± %.0f µT", 1e6*k*f.Intercept/f.Slope, 1e6*k*f.InterceptSE/f.Slope)
			}
			notes = append(notes, note)
		})
	return notes
}

// timeAndDirection fits e/m against reading order and current direction
// together, e/m = a + b·order + c·sign(I), so a drift in time and a
// background field along the axis are told apart. With a background B_bg,
// e/m computed from k·|I| alone is high one way and low the other:
// √(e/m₊/e/m₋) = (kI + B_bg)/(kI − B_bg) [derived from PHYSICS.md §2(b)].
// A group that took every point both ways has averaged the background out:
// it is returned as a note, not a finding. A group that took one way only
// cannot average it: then 1/r against I shows it as an intercept
// (oneWayBackground).
func timeAndDirection(fs *findings, rs []siReading, em, uem []float64, k float64, judged Verdict) (note string) {
	n := len(rs)
	if n < 5 {
		return ""
	}
	one := make([]float64, n)
	order := make([]float64, n)
	var kI []float64
	for i, r := range rs {
		one[i], order[i] = 1, float64(i)
		kI = append(kI, k*math.Abs(r.v("coil_current")))
	}
	dir, pos, neg := directions(rs)
	cols := [][]float64{one, order}
	if pos >= 2 && neg >= 2 {
		cols = append(cols, dir)
	}
	coef, se, crit, err := weightedModel(cols, em, uem)
	if err != nil {
		return ""
	}
	if se[1] > 0 && math.Abs(coef[1]/se[1]) > crit {
		fs.add(CodeDrift, fmt.Sprintf("e/m changes by %+.2g C/kg per reading (t = %+.1f)", coef[1], coef[1]/se[1]), 0.8, true)
	}
	if len(coef) < 3 {
		if pos == 0 || neg == 0 {
			oneWayBackground(fs, rs, em, kI, judged != Consistent)
		}
		return ""
	}
	if !(se[2] > 0) || math.Abs(coef[2]/se[2]) <= crit {
		return ""
	}
	ep, en := coef[0]+coef[2], coef[0]-coef[2]
	if en <= 0 {
		return ""
	}
	s := math.Sqrt(ep / en)
	bg := median(kI) * (s - 1) / (s + 1)
	// Below about 10 µT the bias on e/m stays under 3 %, inside a
	// teaching lab's uncertainty // common practice.
	if math.Abs(bg) < 10e-6 {
		return ""
	}
	evidence := fmt.Sprintf("e/m one way %.4g, the other way %.4g C/kg (t = %.1f): about %.0f µT along the axis",
		ep, en, coef[2]/se[2], bg*1e6)
	if bothWays(rs) {
		return "background along the axis: " + evidence + "; every point was taken both ways, so it averages out"
	}
	fs.add(CodeBackgroundAxial, evidence, 0.9, true)
	return ""
}

// directions is each reading's current direction, +1 or −1 (a current of
// zero counts as +1), and how many go each way.
func directions(rs []siReading) (dir []float64, pos, neg int) {
	dir = make([]float64, len(rs))
	for i, r := range rs {
		if r.v("coil_current") >= 0 {
			dir[i] = 1
			pos++
		} else {
			dir[i] = -1
			neg++
		}
	}
	return dir, pos, neg
}

// bothWays reports whether every reading has a partner with the current
// reversed at about the same current (2 %) and voltage (5 %) // common
// practice: the pairs that average a background out.
func bothWays(rs []siReading) bool {
	used := make([]bool, len(rs))
	for i, a := range rs {
		if used[i] {
			continue
		}
		found := false
		for j := i + 1; j < len(rs) && !found; j++ {
			b := rs[j]
			Ia, Ib := a.v("coil_current"), b.v("coil_current")
			if used[j] || Ia*Ib >= 0 || math.Abs(Ia+Ib) > 0.02*math.Abs(Ia) ||
				math.Abs(a.v("anode_voltage")-b.v("anode_voltage")) > 0.05*a.v("anode_voltage") {
				continue
			}
			used[i], used[j], found = true, true, true
		}
		if !found {
			return false
		}
	}
	return true
}

// oneWayBackground looks for a background along the axis in a run taken
// with the current one way only, which cannot average it out. With a
// background B_bg, e/m from k·|I| alone is e/m·((k|I| + B_bg)/k|I|)², so
// √(e/m_i) = √(e/m)·(1 + B_bg/(k|I_i|)): a line in 1/(k|I|) whose slope over
// intercept is B_bg [derived from PHYSICS.md §2(b)]. A slope significant by
// Student's t names the background outright; otherwise, when the mean e/m
// is judged off, or check, by what a background of the Earth's size would give (up to 70 µT:
// the Earth's field is 22–67 µT [pub: World Magnetic Model, from memory]),
// it is offered as a candidate with less weight.
func oneWayBackground(fs *findings, rs []siReading, em, kI []float64, off bool) {
	x := make([]float64, len(rs))
	y := make([]float64, len(rs))
	for i := range rs {
		x[i] = 1 / kI[i]
		y[i] = math.Sqrt(em[i])
	}
	f, err := fit.Linear(x, y)
	if err != nil || !(f.Intercept > 0) {
		return
	}
	if bg := f.Slope / f.Intercept; f.SlopeSE > 0 && math.Abs(f.Slope/f.SlopeSE) > tShape(len(rs)-2) && math.Abs(bg) >= 10e-6 {
		fs.add(CodeBackgroundAxial, fmt.Sprintf("every reading has the current one way, and e/m grows with 1/I as a background of %.0f µT along the axis gives (t = %.1f); reversing the current would average it out",
			bg*1e6, f.Slope/f.SlopeSE), 0.9, true)
		return
	}
	rho := median(em) / ElectronChargeToMass
	bg := median(kI) * (math.Sqrt(rho) - 1)
	if off && math.Abs(bg) >= 10e-6 && math.Abs(bg) <= 70e-6 {
		fs.add(CodeBackgroundAxial, fmt.Sprintf("every reading has the current one way; e/m / CODATA = %.3f is what a background of %.0f µT along the axis gives",
			rho, bg*1e6), 0.7, true)
	}
}

// reportedChargeToMass compares the group's own e/m with the tool's
// recomputation from the same readings.
func reportedChargeToMass(fs *findings, rs []siReading, em []float64) {
	var ratios, heater []float64
	for i, r := range rs {
		if r.has("reported_e_over_m") && em[i] > 0 {
			ratios = append(ratios, r.v("reported_e_over_m")/em[i])
			if r.has("heater_voltage") {
				heater = append(heater, r.v("heater_voltage")/r.v("anode_voltage"))
			}
		}
	}
	if len(ratios) == 0 {
		return
	}
	rho := median(ratios)
	what := "the group's e/m / the tool's"
	before := len(*fs)
	fs.matchFactor(rho, 0.01, what, CodeDiameterAsRadius, CodeTwoN, CodeRadiusHalvedTwice, CodeSingleLoop,
		CodeExtraFactorTwo, CodeFactorTwoDropped, CodeHelmholtzDropped, CodeRInCm, CodeGaussAsTesla,
		CodeMilliteslaAsTesla, CodeMu0Without4Pi)
	if len(heater) > 0 && math.Abs(math.Log(rho/median(heater))) < 0.02 {
		fs.add(CodeHeaterInFormula, fmt.Sprintf("%s = %.3g, the heater/anode voltage ratio", what, rho), 1, true)
	}
	if len(*fs) == before {
		fs.matchDecade(rho, 0.01, what)
	}
}

func maxOf(v []float64) float64 {
	m := math.Inf(-1)
	for _, x := range v {
		m = math.Max(m, x)
	}
	return m
}

func minOf(v []float64) float64 {
	m := math.Inf(1)
	for _, x := range v {
		m = math.Min(m, x)
	}
	return m
}
