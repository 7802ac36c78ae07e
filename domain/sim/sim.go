// Package sim makes simulated groups: realistic runs of each experiment,
// clean or with one mistake from the catalogue injected the way a group
// would make it. The demo class, the diagnosis tests and the accuracy report
// use them. Everything here is invented data; nothing is a reference value.
package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"time"

	"example.com/fluxroom/domain"
)

// Group is one simulated group's bench and readings.
type Group struct {
	Experiment string
	// Mistake is the injected diagnosis code, or "" for a clean group.
	Mistake  string
	Bench    domain.Bench
	Readings []domain.Reading
}

// simulator builds one run: the bench constants and the readings' values.
type simulator func(rng *rand.Rand, mistake string) (map[string]domain.Quantity, []map[string]domain.Quantity)

var simulators = map[string]struct {
	run      simulator
	mistakes []string
}{
	"coil_force": {simCoilForce, []string{domain.CodeSensorNotZeroed, domain.CodeLengthDoubled, domain.CodeTurnsMismatch, domain.CodeFieldProbeTilted,
		domain.CodeNonlinear, domain.CodeSignReversed, domain.CodeDecadeSlip, domain.CodeDecimalSlipPoint, domain.CodeDrift, domain.CodeTooGood, domain.CodeTurnsLeftOut, domain.CodeBothSegments,
		domain.CodeMassAsForce, domain.CodeScatterBeyond, domain.CodeOutlierPoint}},
	"e_over_m": {simEOverM, []string{domain.CodeRadiusEntered, domain.CodeHeaterAsAnode, domain.CodeKSingleLoop, domain.CodeKNoHelmholtzFactor,
		domain.CodeBackgroundAxial, domain.CodeLargeOrbitsLow, domain.CodeBeamTilt, domain.CodeDiameterAsRadius, domain.CodeTwoN, domain.CodeRadiusHalvedTwice,
		domain.CodeSingleLoop, domain.CodeExtraFactorTwo, domain.CodeFactorTwoDropped, domain.CodeHelmholtzDropped, domain.CodeRInCm, domain.CodeGaussAsTesla,
		domain.CodeMilliteslaAsTesla, domain.CodeMu0Without4Pi, domain.CodeHeaterInFormula, domain.CodeDrift, domain.CodeDecimalSlipPoint, domain.CodeOutlierPoint}},
	"straight_wire": {simWire, []string{domain.CodeWireBackground, domain.CodeReversalSign, domain.CodeTipOffset, domain.CodeWrongScale,
		domain.CodeProbeNotAligned, domain.CodeSignReversed, domain.CodeDecadeSlip, domain.CodeWireLoopFormula, domain.CodeDecimalSlipPoint, domain.CodeDrift}},
	"solenoid": {simSolenoid, []string{domain.CodeProbeAtEnd, domain.CodeProbeNotAligned, domain.CodeSignReversed, domain.CodeDecadeSlip,
		domain.CodeTotalTurnsAsN, domain.CodeNPerCm, domain.CodeDecimalSlipPoint, domain.CodeDrift, domain.CodeScatterBeyond}},
	"flat_coil": {simFlatCoil, []string{domain.CodeCoilDiameterAsRadius, domain.CodeProbeNotAligned, domain.CodeSignReversed, domain.CodeDecadeSlip,
		domain.CodeCoilWireFormula, domain.CodeCoilDiameterInFormula, domain.CodeDecimalSlipPoint, domain.CodeOutlierPoint}},
}

// Mistakes lists the codes Simulate can inject for an experiment.
func Mistakes(experiment string) []string {
	return append([]string(nil), simulators[experiment].mistakes...)
}

// Experiments lists the experiments Simulate knows, sorted.
func Experiments() []string {
	var out []string
	for id := range simulators {
		out = append(out, id)
	}
	sort.Strings(out)
	return out
}

// Simulate makes one group's run of an experiment with the given mistake
// ("" for none). Readings are a minute apart from t0.
func Simulate(experiment, mistake string, rng *rand.Rand, t0 time.Time) (Group, error) {
	s, ok := simulators[experiment]
	if !ok {
		return Group{}, fmt.Errorf("sim: no simulator for experiment %q", experiment)
	}
	if mistake != "" {
		known := false
		for _, m := range s.mistakes {
			known = known || m == mistake
		}
		if !known {
			return Group{}, fmt.Errorf("sim: experiment %s cannot simulate mistake %q", experiment, mistake)
		}
	}
	consts, values := s.run(rng, mistake)
	g := Group{Experiment: experiment, Mistake: mistake, Bench: domain.Bench{Label: "SIM", Experiment: experiment, Constants: consts}}
	for i, v := range values {
		g.Readings = append(g.Readings, domain.Reading{ID: fmt.Sprintf("sim-%02d", i), Values: domain.ValuesOf(v),
			ReceivedAt: t0.Add(time.Duration(i) * time.Minute), Sequence: uint64(i + 1)})
	}
	return g, nil
}

// round rounds x to a multiple of step, as a digital display does.
func round(x, step float64) float64 { return math.Round(x/step) * step }

func qty(v float64, unit string) domain.Quantity { return domain.Quantity{Value: v, Unit: unit} }

func uniform(rng *rand.Rand, lo, hi float64) float64 { return lo + (hi-lo)*rng.Float64() }

func simCoilForce(rng *rand.Rand, mistake string) (map[string]domain.Quantity, []map[string]domain.Quantity) {
	turns := []float64{50, 100}[rng.IntN(2)]
	realTurns := turns
	lengthSet := 4.0 // cm
	bTrue := uniform(rng, 0.110, 0.130)
	// The bench's B was measured once, to about 1 %; fringing lengthens L by about 1 %.
	bSet := bTrue * (1 + 0.01*rng.NormFloat64())
	scale := 1.01
	switch mistake {
	case domain.CodeLengthDoubled:
		lengthSet = 8.0
	case domain.CodeTurnsMismatch:
		turns, realTurns = 100, 50
	case domain.CodeFieldProbeTilted:
		bSet = bTrue * math.Cos(uniform(rng, 20, 40)*math.Pi/180)
	case domain.CodeDecadeSlip:
		bSet /= 10
	}
	c := map[string]domain.Quantity{"turns": qty(turns, "1"), "segment_length": qty(lengthSet, "cm"),
		"gap_field": qty(round(bSet*1000, 0.1), "mT")}
	slope := realTurns * bTrue * 0.04 * scale
	offset := 0.0
	if mistake == domain.CodeSensorNotZeroed {
		offset = uniform(rng, 0.2, 1.5) * float64(1-2*rng.IntN(2))
	}
	slip := 1 + rng.IntN(10) // never the 0 A point, where ×10 changes nothing
	// A sensor set to show kilograms, read off and typed as newtons.
	massAsForce := mistake == domain.CodeMassAsForce
	// Half the run (the way down) taken after the magnet was moved on
	// its stand, so the segment sits partly out of the gap; or one
	// reading misread, by no factor a slip gives. Drawn only for these
	// mistakes, so that the other runs stay as they were.
	var moved, misread float64
	switch mistake {
	case domain.CodeScatterBeyond:
		moved = uniform(rng, 0.5, 0.7)
	case domain.CodeOutlierPoint:
		misread = uniform(rng, 1.4, 2.2)
	}
	var out []map[string]domain.Quantity
	// Up in whole amperes, then down in the half steps, so a drift in
	// time does not line up with the current.
	for i, I := range []float64{0, 0.8, 1.6, 2.4, 3.2, 4.0, 3.6, 2.8, 2.0, 1.2, 0.4} {
		shownI := round(I+0.005*rng.NormFloat64(), 0.01)
		F := slope*I + offset + 0.004*rng.NormFloat64()
		switch mistake {
		case domain.CodeNonlinear:
			F = slope * I * (1 - 0.07*I)
			F += 0.004 * rng.NormFloat64()
		case domain.CodeSignReversed:
			F = -F
		case domain.CodeDrift:
			F += 0.015 * float64(i)
		case domain.CodeTooGood:
			F = turns * bSet * lengthSet / 100 * shownI // computed, not measured
		case domain.CodeScatterBeyond:
			if i > 5 {
				F = slope*moved*I + 0.004*rng.NormFloat64()
			}
		case domain.CodeOutlierPoint:
			if i == slip {
				F *= misread
			}
		}
		if massAsForce {
			F /= domain.StandardGravity
		}
		shownF := round(F, 0.001)
		if mistake == domain.CodeTooGood {
			shownF = round(F, 0.0001)
		}
		if mistake == domain.CodeDecimalSlipPoint && i == slip {
			shownF *= 10
		}
		v := map[string]domain.Quantity{"current": qty(shownI, "A"), "force": qty(shownF, "N")}
		nbl := turns * bSet * lengthSet / 100
		switch mistake {
		case domain.CodeTurnsLeftOut:
			v["reported_prediction"] = qty(round(nbl/turns, 1e-5), "N/A")
		case domain.CodeBothSegments:
			v["reported_prediction"] = qty(round(2*nbl, 1e-4), "N/A")
		}
		out = append(out, v)
	}
	return c, out
}

func simEOverM(rng *rand.Rand, mistake string) (map[string]domain.Quantity, []map[string]domain.Quantity) {
	const N, R = 130, 0.150
	kTrue := domain.HelmholtzFactor * domain.Mu0 * N / R
	c := map[string]domain.Quantity{"coil_turns": qty(N, "1"), "coil_radius": qty(15.0, "cm")}
	switch mistake {
	case domain.CodeKSingleLoop:
		c["coil_constant"] = qty(round(domain.Mu0*N/(2*R)*1000, 1e-4), "mT/A")
	case domain.CodeKNoHelmholtzFactor:
		c["coil_constant"] = qty(round(domain.Mu0*N/R*1000, 1e-4), "mT/A")
	}
	// A small background along the axis is always there; clean groups
	// average it out or it stays within a few µT.
	bg := 3e-6 * rng.NormFloat64()
	if mistake == domain.CodeBackgroundAxial {
		bg = uniform(rng, 30e-6, 60e-6)
	}
	tilt := 0.0
	if mistake == domain.CodeBeamTilt {
		// 15–22° reads e/m 7–16 % high; a smaller tilt stays inside the
		// 5 % band, where no judging can see it.
		tilt = uniform(rng, 15, 22) * math.Pi / 180
	}
	// The point with a slipped decimal or a misread value, and which value.
	var slip, slipValue int
	if mistake == domain.CodeDecimalSlipPoint || mistake == domain.CodeOutlierPoint {
		slip, slipValue = rng.IntN(8), rng.IntN(3)
	}
	var out []map[string]domain.Quantity
	i := 0
	// Each point with the current one way, then the other, as a careful
	// group does to average out a background field; a group that leaves
	// the background in takes them all one way, at the same currents.
	for _, V := range []float64{150, 250} {
		for _, I := range []float64{1.0, -1.0, 1.6, -1.6} {
			if V == 250 {
				I *= 1.2
			}
			if mistake == domain.CodeBackgroundAxial {
				I = math.Abs(I) * (1 + 0.15*float64(i%2))
			}
			em := domain.ElectronChargeToMass
			B := math.Abs(kTrue*I + bg)
			r := math.Sqrt(2*V/em) / B
			if mistake == domain.CodeLargeOrbitsLow {
				em *= 1 - 0.12*(r/0.05)*(r/0.05)
				r = math.Sqrt(2*V/em) / B
			}
			r *= math.Cos(tilt)
			if mistake == domain.CodeDrift {
				r *= 1 + 0.02*float64(i)
			}
			d := round(2*r+0.001*rng.NormFloat64(), 0.001)
			shownV := round(V+0.5*rng.NormFloat64(), 1)
			shownI := round(I+0.003*rng.NormFloat64(), 0.01)
			v := map[string]domain.Quantity{"anode_voltage": qty(shownV, "V"), "coil_current": qty(shownI, "A"),
				"beam_diameter": qty(d*100, "cm"), "heater_voltage": qty(6.3, "V")}
			switch mistake {
			case domain.CodeRadiusEntered:
				v["beam_diameter"] = qty(round(d/2*100, 0.1), "cm")
			case domain.CodeHeaterAsAnode:
				v["anode_voltage"] = qty(6.3, "V")
			case domain.CodeDecimalSlipPoint, domain.CodeOutlierPoint:
				if i == slip {
					// ÷10 on one value: ×10 would break a limit and be
					// refused or called unsafe, which is seen already.
					f := 0.1
					if mistake == domain.CodeOutlierPoint {
						f = uniform(rng, 0.65, 0.8) // a diameter read off the wrong mark
						slipValue = 2
					}
					name := []string{"anode_voltage", "coil_current", "beam_diameter"}[slipValue]
					q := v[name]
					q.Value = sig3(q.Value * f)
					v[name] = q
				}
			}
			// The group's own e/m from its own recorded numbers.
			kk := kTrue
			if q, ok := c["coil_constant"]; ok {
				kk = q.Value / 1000
			}
			ownB, ownR, ownV := kk*math.Abs(shownI), d/2, shownV
			factor := 1.0
			switch mistake {
			case domain.CodeDiameterAsRadius:
				ownR = d
			case domain.CodeTwoN:
				ownB *= 2
			case domain.CodeRadiusHalvedTwice:
				ownR = d / 4
			case domain.CodeSingleLoop:
				ownB = domain.Mu0 * N * math.Abs(shownI) / (2 * R)
			case domain.CodeExtraFactorTwo:
				factor = 2
			case domain.CodeFactorTwoDropped:
				factor = 0.5
			case domain.CodeHelmholtzDropped:
				ownB = domain.Mu0 * N * math.Abs(shownI) / R
			case domain.CodeRInCm:
				ownR = d / 2 * 100
			case domain.CodeGaussAsTesla:
				ownB *= 1e4
			case domain.CodeMilliteslaAsTesla:
				ownB *= 1e3
			case domain.CodeMu0Without4Pi:
				ownB /= 4 * math.Pi
			case domain.CodeHeaterInFormula:
				ownV = 6.3
			}
			if factor != 1 || ownB != kk*math.Abs(shownI) || ownR != d/2 || ownV != shownV {
				own := factor * 2 * ownV / (ownB * ownB * ownR * ownR)
				v["reported_e_over_m"] = qty(sig3(own), "C/kg")
			}
			out = append(out, v)
			i++
		}
	}
	return c, out
}

// sig3 rounds to three significant figures, as a group writes a result.
func sig3(x float64) float64 {
	if x == 0 {
		return 0
	}
	e := math.Floor(math.Log10(math.Abs(x))) - 2
	return round(x, math.Pow(10, e))
}

// meterRange is the smallest full scale of a 0.3–1–3–10 G meter that holds b.
func meterRange(b float64) float64 {
	for _, r := range []float64{0.3, 1, 3, 10} {
		if math.Abs(b) <= r*1e-4 {
			return r
		}
	}
	return 10
}

func simWire(rng *rand.Rand, mistake string) (map[string]domain.Quantity, []map[string]domain.Quantity) {
	const ell = 1.0
	delta := uniform(rng, 0.002, 0.004) // the sensing element's depth in the probe
	offsetSet := delta
	if mistake == domain.CodeTipOffset {
		offsetSet = 0
		delta = uniform(rng, 0.003, 0.005)
	}
	c := map[string]domain.Quantity{"wire_length": qty(ell, "m"), "sensor_offset": qty(round(offsetSet*1000, 0.1), "mm"),
		"scale_ratio": qty(3.16, "1")}
	bg := uniform(rng, 0.2e-4, 0.5e-4) // the Earth's and the lab's field along the probe
	cos := 1.0
	if mistake == domain.CodeProbeNotAligned {
		cos = math.Cos(uniform(rng, 25, 45) * math.Pi / 180)
	}
	type pt struct{ I, r float64 }
	pts := []pt{{10, 0.01}, {10, 0.02}, {10, 0.03}, {10, 0.05}, {15, 0.02}, {15, 0.04}, {15, 0.08}, {5, 0.01}}
	slip := rng.IntN(len(pts))
	var out []map[string]domain.Quantity
	for i, p := range pts {
		I := p.I
		if mistake == domain.CodeDrift {
			I *= 1 - 0.025*float64(i) // the wire heats and the supply's current sags
		}
		bw := domain.WireField(I, p.r+delta, ell) * cos * (1 + 0.01*rng.NormFloat64())
		if mistake == domain.CodeSignReversed {
			bw = -bw
		}
		fwd, rev := bw+bg, -bw+bg
		rg := meterRange(fwd)
		read := func(b float64) float64 {
			if mistake == domain.CodeWrongScale && rg == 3 {
				b /= 3.16 // the 0–1 scale read on the 3 G range
			}
			return round(b*1e4, 0.01)
		}
		v := map[string]domain.Quantity{"current": qty(p.I, "A"), "distance": qty(round(p.r*100, 0.1), "cm"),
			"field": qty(read(fwd), "G"), "meter_range": qty(rg, "G")}
		if mistake != domain.CodeWireBackground {
			rv := read(rev)
			if mistake == domain.CodeReversalSign {
				rv = math.Abs(rv)
			}
			v["field_reversed"] = qty(rv, "G")
		}
		switch mistake {
		case domain.CodeDecadeSlip:
			f := v["field"]
			f.Unit = "mT" // read in gauss, typed as millitesla
			v["field"] = f
			r := v["field_reversed"]
			r.Unit = "mT"
			v["field_reversed"] = r
		case domain.CodeDecimalSlipPoint:
			if i == slip {
				for _, k := range []string{"field", "field_reversed"} {
					q := v[k]
					q.Value *= 10
					v[k] = q
				}
			}
		case domain.CodeWireLoopFormula:
			v["reported_theory"] = qty(sig3(domain.Mu0*p.I/(2*p.r)*1e4), "G")
		}
		out = append(out, v)
	}
	return c, out
}

func simSolenoid(rng *rand.Rand, mistake string) (map[string]domain.Quantity, []map[string]domain.Quantity) {
	const N, L, R = 500, 0.15, 0.02
	c := map[string]domain.Quantity{"turns": qty(N, "1"), "length": qty(15, "cm"), "radius": qty(2, "cm")}
	cos := 1.0
	if mistake == domain.CodeProbeNotAligned {
		cos = math.Cos(uniform(rng, 25, 45) * math.Pi / 180)
	}
	z := 0.0
	if mistake == domain.CodeProbeAtEnd {
		z = L / 2
	}
	slip := rng.IntN(6)
	var out []map[string]domain.Quantity
	for i, I := range []float64{0.5, 1.0, 1.5, 2.0, 2.5, 1.2} {
		if mistake == domain.CodeScatterBeyond {
			// The probe slid towards the end after the third reading.
			z = 0
			if i >= 3 {
				z = L / 2
			}
		}
		Ieff := I
		if mistake == domain.CodeDrift {
			Ieff *= 1 - 0.03*float64(i)
		}
		B := domain.SolenoidField(N, L, R, Ieff, z) * cos * (1 + 0.01*rng.NormFloat64())
		if mistake == domain.CodeSignReversed {
			B = -B
		}
		shown := round(B*1e3, 0.001) // mT
		if mistake == domain.CodeDecimalSlipPoint && i == slip {
			// ÷10 where ×10 would pass the 0.1 T an air core can give, and
			// be refused at the door instead.
			if shown*10 < 90 {
				shown *= 10
			} else {
				shown = round(shown/10, 0.001)
			}
		}
		v := map[string]domain.Quantity{"current": qty(I, "A"), "field": qty(shown, "mT")}
		if mistake == domain.CodeDecadeSlip {
			v["field"] = qty(shown, "G") // read in millitesla, typed as gauss
		}
		switch mistake {
		case domain.CodeTotalTurnsAsN:
			v["reported_theory"] = qty(sig3(domain.Mu0*N*I*1e3), "mT")
		case domain.CodeNPerCm:
			v["reported_theory"] = qty(sig3(domain.Mu0*(N/(L*100))*I*1e3), "mT")
		}
		out = append(out, v)
	}
	return c, out
}

func simFlatCoil(rng *rand.Rand, mistake string) (map[string]domain.Quantity, []map[string]domain.Quantity) {
	const N, R = 200, 0.105
	rSet := 10.5
	if mistake == domain.CodeCoilDiameterAsRadius {
		rSet = 21
	}
	c := map[string]domain.Quantity{"turns": qty(N, "1"), "radius": qty(rSet, "cm")}
	cos := 1.0
	if mistake == domain.CodeProbeNotAligned {
		cos = math.Cos(uniform(rng, 25, 45) * math.Pi / 180)
	}
	type pt struct{ I, z float64 }
	pts := []pt{{0.5, 0}, {1, 0}, {1.5, 0}, {2, 0}, {2.5, 0}, {2, 0.03}, {2, 0.06}}
	slip := rng.IntN(len(pts))
	var out []map[string]domain.Quantity
	for i, p := range pts {
		B := domain.CoilField(N, R, p.I, p.z) * cos * (1 + 0.01*rng.NormFloat64())
		if mistake == domain.CodeSignReversed {
			B = -B
		}
		shown := round(B*1e3, 0.001)
		if mistake == domain.CodeDecimalSlipPoint && i == slip {
			shown *= 10
		}
		if mistake == domain.CodeOutlierPoint && i == slip {
			shown = round(shown*uniform(rng, 0.4, 0.7), 0.001) // read at the wrong position
		}
		v := map[string]domain.Quantity{"current": qty(p.I, "A"), "field": qty(shown, "mT"), "position": qty(p.z*100, "cm")}
		switch mistake {
		case domain.CodeDecadeSlip:
			v["field"] = qty(shown, "G") // read in millitesla, typed as gauss
		case domain.CodeCoilWireFormula:
			// The group's centre formula, used at every position.
			v["reported_theory"] = qty(sig3(domain.Mu0*N*p.I/(2*math.Pi*R)*1e3), "mT")
		case domain.CodeCoilDiameterInFormula:
			v["reported_theory"] = qty(sig3(domain.Mu0*N*p.I/(2*2*R)*1e3), "mT")
		}
		out = append(out, v)
	}
	return c, out
}
