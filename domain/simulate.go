package domain

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"time"
)

// Simulated groups: realistic runs of each experiment, clean or with one
// mistake from the catalogue injected the way a group would make it. The
// demo class, the golden diagnosis tests and the accuracy report all use
// them. Everything here is invented data; nothing is a reference value.

// SimGroup is one simulated group's bench and readings.
type SimGroup struct {
	Experiment string
	// Mistake is the injected diagnosis code, or "" for a clean group.
	Mistake  string
	Bench    Bench
	Readings []Reading
}

// simulator builds one run: the bench constants and the readings' values.
type simulator func(rng *rand.Rand, mistake string) (map[string]Quantity, []map[string]Quantity)

var simulators = map[string]struct {
	run      simulator
	mistakes []string
}{
	"coil_force": {simCoilForce, []string{CodeSensorNotZeroed, CodeLengthDoubled, CodeTurnsMismatch, CodeFieldProbeTilted,
		CodeNonlinear, CodeSignReversed, CodeDecadeSlip, CodeDecimalSlipPoint, CodeDrift, CodeTooGood, CodeTurnsLeftOut, CodeBothSegments,
		CodeMassAsForce, CodeScatterBeyond, CodeOutlierPoint}},
	"e_over_m": {simEOverM, []string{CodeRadiusEntered, CodeHeaterAsAnode, CodeKSingleLoop, CodeKNoHelmholtzFactor,
		CodeBackgroundAxial, CodeLargeOrbitsLow, CodeBeamTilt, CodeDiameterAsRadius, CodeTwoN, CodeRadiusHalvedTwice,
		CodeSingleLoop, CodeExtraFactorTwo, CodeFactorTwoDropped, CodeHelmholtzDropped, CodeRInCm, CodeGaussAsTesla,
		CodeMilliteslaAsTesla, CodeMu0Without4Pi, CodeHeaterInFormula, CodeDrift, CodeDecimalSlipPoint, CodeOutlierPoint}},
	"straight_wire": {simWire, []string{CodeWireBackground, CodeReversalSign, CodeTipOffset, CodeWrongScale,
		CodeProbeNotAligned, CodeSignReversed, CodeDecadeSlip, CodeWireLoopFormula, CodeDecimalSlipPoint, CodeDrift}},
	"solenoid": {simSolenoid, []string{CodeProbeAtEnd, CodeProbeNotAligned, CodeSignReversed, CodeDecadeSlip,
		CodeTotalTurnsAsN, CodeNPerCm, CodeDecimalSlipPoint, CodeDrift, CodeScatterBeyond}},
	"flat_coil": {simFlatCoil, []string{CodeCoilDiameterAsRadius, CodeProbeNotAligned, CodeSignReversed, CodeDecadeSlip,
		CodeCoilWireFormula, CodeCoilDiameterInFormula, CodeDecimalSlipPoint, CodeOutlierPoint}},
}

// SimulatedMistakes lists the codes Simulate can inject for an experiment.
func SimulatedMistakes(experiment string) []string {
	return append([]string(nil), simulators[experiment].mistakes...)
}

// SimulatedExperiments lists the experiments Simulate knows, sorted.
func SimulatedExperiments() []string {
	var out []string
	for id := range simulators {
		out = append(out, id)
	}
	sort.Strings(out)
	return out
}

// Simulate makes one group's run of an experiment with the given mistake
// ("" for none). Readings are a minute apart from t0.
func Simulate(experiment, mistake string, rng *rand.Rand, t0 time.Time) (SimGroup, error) {
	s, ok := simulators[experiment]
	if !ok {
		return SimGroup{}, fmt.Errorf("domain: no simulator for experiment %q", experiment)
	}
	if mistake != "" {
		known := false
		for _, m := range s.mistakes {
			known = known || m == mistake
		}
		if !known {
			return SimGroup{}, fmt.Errorf("domain: experiment %s cannot simulate mistake %q", experiment, mistake)
		}
	}
	consts, values := s.run(rng, mistake)
	g := SimGroup{Experiment: experiment, Mistake: mistake, Bench: Bench{Label: "SIM", Experiment: experiment, Constants: consts}}
	for i, v := range values {
		g.Readings = append(g.Readings, Reading{ID: fmt.Sprintf("sim-%02d", i), Values: v,
			ReceivedAt: t0.Add(time.Duration(i) * time.Minute), Sequence: uint64(i + 1)})
	}
	return g, nil
}

// round rounds x to a multiple of step, as a digital display does.
func round(x, step float64) float64 { return math.Round(x/step) * step }

func qty(v float64, unit string) Quantity { return Quantity{Value: v, Unit: unit} }

func uniform(rng *rand.Rand, lo, hi float64) float64 { return lo + (hi-lo)*rng.Float64() }

func simCoilForce(rng *rand.Rand, mistake string) (map[string]Quantity, []map[string]Quantity) {
	turns := []float64{50, 100}[rng.IntN(2)]
	realTurns := turns
	lengthSet := 4.0 // cm
	bTrue := uniform(rng, 0.110, 0.130)
	// The bench's B was measured once, to about 1 %; fringing lengthens L by about 1 %.
	bSet := bTrue * (1 + 0.01*rng.NormFloat64())
	scale := 1.01
	switch mistake {
	case CodeLengthDoubled:
		lengthSet = 8.0
	case CodeTurnsMismatch:
		turns, realTurns = 100, 50
	case CodeFieldProbeTilted:
		bSet = bTrue * math.Cos(uniform(rng, 20, 40)*math.Pi/180)
	case CodeDecadeSlip:
		bSet /= 10
	}
	c := map[string]Quantity{"turns": qty(turns, "1"), "segment_length": qty(lengthSet, "cm"),
		"gap_field": qty(round(bSet*1000, 0.1), "mT")}
	slope := realTurns * bTrue * 0.04 * scale
	offset := 0.0
	if mistake == CodeSensorNotZeroed {
		offset = uniform(rng, 0.2, 1.5) * float64(1-2*rng.IntN(2))
	}
	slip := 1 + rng.IntN(10) // never the 0 A point, where ×10 changes nothing
	// A sensor set to show kilograms, read off and typed as newtons.
	massAsForce := mistake == CodeMassAsForce
	// Half the run (the way down) taken after the magnet was moved on
	// its stand, so the segment sits partly out of the gap; or one
	// reading misread, by no factor a slip gives. Drawn only for these
	// mistakes, so that the other runs stay as they were.
	var moved, misread float64
	switch mistake {
	case CodeScatterBeyond:
		moved = uniform(rng, 0.5, 0.7)
	case CodeOutlierPoint:
		misread = uniform(rng, 1.4, 2.2)
	}
	var out []map[string]Quantity
	// Up in whole amperes, then down in the half steps, so a drift in
	// time does not line up with the current.
	for i, I := range []float64{0, 0.8, 1.6, 2.4, 3.2, 4.0, 3.6, 2.8, 2.0, 1.2, 0.4} {
		shownI := round(I+0.005*rng.NormFloat64(), 0.01)
		F := slope*I + offset + 0.004*rng.NormFloat64()
		switch mistake {
		case CodeNonlinear:
			F = slope * I * (1 - 0.07*I)
			F += 0.004 * rng.NormFloat64()
		case CodeSignReversed:
			F = -F
		case CodeDrift:
			F += 0.015 * float64(i)
		case CodeTooGood:
			F = turns * bSet * lengthSet / 100 * shownI // computed, not measured
		case CodeScatterBeyond:
			if i > 5 {
				F = slope*moved*I + 0.004*rng.NormFloat64()
			}
		case CodeOutlierPoint:
			if i == slip {
				F *= misread
			}
		}
		if massAsForce {
			F /= StandardGravity
		}
		shownF := round(F, 0.001)
		if mistake == CodeTooGood {
			shownF = round(F, 0.0001)
		}
		if mistake == CodeDecimalSlipPoint && i == slip {
			shownF *= 10
		}
		v := map[string]Quantity{"current": qty(shownI, "A"), "force": qty(shownF, "N")}
		nbl := turns * bSet * lengthSet / 100
		switch mistake {
		case CodeTurnsLeftOut:
			v["reported_prediction"] = qty(round(nbl/turns, 1e-5), "N/A")
		case CodeBothSegments:
			v["reported_prediction"] = qty(round(2*nbl, 1e-4), "N/A")
		}
		out = append(out, v)
	}
	return c, out
}

func simEOverM(rng *rand.Rand, mistake string) (map[string]Quantity, []map[string]Quantity) {
	const N, R = 130, 0.150
	kTrue := helmholtzFactor * Mu0 * N / R
	c := map[string]Quantity{"coil_turns": qty(N, "1"), "coil_radius": qty(15.0, "cm")}
	switch mistake {
	case CodeKSingleLoop:
		c["coil_constant"] = qty(round(Mu0*N/(2*R)*1000, 1e-4), "mT/A")
	case CodeKNoHelmholtzFactor:
		c["coil_constant"] = qty(round(Mu0*N/R*1000, 1e-4), "mT/A")
	}
	// A small background along the axis is always there; clean groups
	// average it out or it stays within a few µT.
	bg := 3e-6 * rng.NormFloat64()
	if mistake == CodeBackgroundAxial {
		bg = uniform(rng, 30e-6, 60e-6)
	}
	tilt := 0.0
	if mistake == CodeBeamTilt {
		// 15–22° reads e/m 7–16 % high; a smaller tilt stays inside the
		// 5 % band, where no judging can see it.
		tilt = uniform(rng, 15, 22) * math.Pi / 180
	}
	// The point with a slipped decimal or a misread value, and which value.
	var slip, slipValue int
	if mistake == CodeDecimalSlipPoint || mistake == CodeOutlierPoint {
		slip, slipValue = rng.IntN(8), rng.IntN(3)
	}
	var out []map[string]Quantity
	i := 0
	// Each point with the current one way, then the other, as a careful
	// group does to average out a background field; a group that leaves
	// the background in takes them all one way, at the same currents.
	for _, V := range []float64{150, 250} {
		for _, I := range []float64{1.0, -1.0, 1.6, -1.6} {
			if V == 250 {
				I *= 1.2
			}
			if mistake == CodeBackgroundAxial {
				I = math.Abs(I) * (1 + 0.15*float64(i%2))
			}
			em := ElectronChargeToMass
			B := math.Abs(kTrue*I + bg)
			r := math.Sqrt(2*V/em) / B
			if mistake == CodeLargeOrbitsLow {
				em *= 1 - 0.12*(r/0.05)*(r/0.05)
				r = math.Sqrt(2*V/em) / B
			}
			r *= math.Cos(tilt)
			if mistake == CodeDrift {
				r *= 1 + 0.02*float64(i)
			}
			d := round(2*r+0.001*rng.NormFloat64(), 0.001)
			shownV := round(V+0.5*rng.NormFloat64(), 1)
			shownI := round(I+0.003*rng.NormFloat64(), 0.01)
			v := map[string]Quantity{"anode_voltage": qty(shownV, "V"), "coil_current": qty(shownI, "A"),
				"beam_diameter": qty(d*100, "cm"), "heater_voltage": qty(6.3, "V")}
			switch mistake {
			case CodeRadiusEntered:
				v["beam_diameter"] = qty(round(d/2*100, 0.1), "cm")
			case CodeHeaterAsAnode:
				v["anode_voltage"] = qty(6.3, "V")
			case CodeDecimalSlipPoint, CodeOutlierPoint:
				if i == slip {
					// ÷10 on one value: ×10 would break a limit and be
					// refused or called unsafe, which is seen already.
					f := 0.1
					if mistake == CodeOutlierPoint {
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
			case CodeDiameterAsRadius:
				ownR = d
			case CodeTwoN:
				ownB *= 2
			case CodeRadiusHalvedTwice:
				ownR = d / 4
			case CodeSingleLoop:
				ownB = Mu0 * N * math.Abs(shownI) / (2 * R)
			case CodeExtraFactorTwo:
				factor = 2
			case CodeFactorTwoDropped:
				factor = 0.5
			case CodeHelmholtzDropped:
				ownB = Mu0 * N * math.Abs(shownI) / R
			case CodeRInCm:
				ownR = d / 2 * 100
			case CodeGaussAsTesla:
				ownB *= 1e4
			case CodeMilliteslaAsTesla:
				ownB *= 1e3
			case CodeMu0Without4Pi:
				ownB /= 4 * math.Pi
			case CodeHeaterInFormula:
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

func simWire(rng *rand.Rand, mistake string) (map[string]Quantity, []map[string]Quantity) {
	const ell = 1.0
	delta := uniform(rng, 0.002, 0.004) // the sensing element's depth in the probe
	offsetSet := delta
	if mistake == CodeTipOffset {
		offsetSet = 0
		delta = uniform(rng, 0.003, 0.005)
	}
	c := map[string]Quantity{"wire_length": qty(ell, "m"), "sensor_offset": qty(round(offsetSet*1000, 0.1), "mm"),
		"scale_ratio": qty(3.16, "1")}
	bg := uniform(rng, 0.2e-4, 0.5e-4) // the Earth's and the lab's field along the probe
	cos := 1.0
	if mistake == CodeProbeNotAligned {
		cos = math.Cos(uniform(rng, 25, 45) * math.Pi / 180)
	}
	type pt struct{ I, r float64 }
	pts := []pt{{10, 0.01}, {10, 0.02}, {10, 0.03}, {10, 0.05}, {15, 0.02}, {15, 0.04}, {15, 0.08}, {5, 0.01}}
	slip := rng.IntN(len(pts))
	var out []map[string]Quantity
	for i, p := range pts {
		I := p.I
		if mistake == CodeDrift {
			I *= 1 - 0.025*float64(i) // the wire heats and the supply's current sags
		}
		bw := wireField(I, p.r+delta, ell) * cos * (1 + 0.01*rng.NormFloat64())
		if mistake == CodeSignReversed {
			bw = -bw
		}
		fwd, rev := bw+bg, -bw+bg
		rg := meterRange(fwd)
		read := func(b float64) float64 {
			if mistake == CodeWrongScale && rg == 3 {
				b /= 3.16 // the 0–1 scale read on the 3 G range
			}
			return round(b*1e4, 0.01)
		}
		v := map[string]Quantity{"current": qty(p.I, "A"), "distance": qty(round(p.r*100, 0.1), "cm"),
			"field": qty(read(fwd), "G"), "meter_range": qty(rg, "G")}
		if mistake != CodeWireBackground {
			rv := read(rev)
			if mistake == CodeReversalSign {
				rv = math.Abs(rv)
			}
			v["field_reversed"] = qty(rv, "G")
		}
		switch mistake {
		case CodeDecadeSlip:
			f := v["field"]
			f.Unit = "mT" // read in gauss, typed as millitesla
			v["field"] = f
			r := v["field_reversed"]
			r.Unit = "mT"
			v["field_reversed"] = r
		case CodeDecimalSlipPoint:
			if i == slip {
				for _, k := range []string{"field", "field_reversed"} {
					q := v[k]
					q.Value *= 10
					v[k] = q
				}
			}
		case CodeWireLoopFormula:
			v["reported_theory"] = qty(sig3(Mu0*p.I/(2*p.r)*1e4), "G")
		}
		out = append(out, v)
	}
	return c, out
}

func simSolenoid(rng *rand.Rand, mistake string) (map[string]Quantity, []map[string]Quantity) {
	const N, L, R = 500, 0.15, 0.02
	c := map[string]Quantity{"turns": qty(N, "1"), "length": qty(15, "cm"), "radius": qty(2, "cm")}
	cos := 1.0
	if mistake == CodeProbeNotAligned {
		cos = math.Cos(uniform(rng, 25, 45) * math.Pi / 180)
	}
	z := 0.0
	if mistake == CodeProbeAtEnd {
		z = L / 2
	}
	slip := rng.IntN(6)
	var out []map[string]Quantity
	for i, I := range []float64{0.5, 1.0, 1.5, 2.0, 2.5, 1.2} {
		if mistake == CodeScatterBeyond {
			// The probe slid towards the end after the third reading.
			z = 0
			if i >= 3 {
				z = L / 2
			}
		}
		Ieff := I
		if mistake == CodeDrift {
			Ieff *= 1 - 0.03*float64(i)
		}
		B := solenoidField(N, L, R, Ieff, z) * cos * (1 + 0.01*rng.NormFloat64())
		if mistake == CodeSignReversed {
			B = -B
		}
		shown := round(B*1e3, 0.001) // mT
		if mistake == CodeDecimalSlipPoint && i == slip {
			// ÷10 where ×10 would pass the 0.1 T an air core can give, and
			// be refused at the door instead.
			if shown*10 < 90 {
				shown *= 10
			} else {
				shown = round(shown/10, 0.001)
			}
		}
		v := map[string]Quantity{"current": qty(I, "A"), "field": qty(shown, "mT")}
		if mistake == CodeDecadeSlip {
			v["field"] = qty(shown, "G") // read in millitesla, typed as gauss
		}
		switch mistake {
		case CodeTotalTurnsAsN:
			v["reported_theory"] = qty(sig3(Mu0*N*I*1e3), "mT")
		case CodeNPerCm:
			v["reported_theory"] = qty(sig3(Mu0*(N/(L*100))*I*1e3), "mT")
		}
		out = append(out, v)
	}
	return c, out
}

func simFlatCoil(rng *rand.Rand, mistake string) (map[string]Quantity, []map[string]Quantity) {
	const N, R = 200, 0.105
	rSet := 10.5
	if mistake == CodeCoilDiameterAsRadius {
		rSet = 21
	}
	c := map[string]Quantity{"turns": qty(N, "1"), "radius": qty(rSet, "cm")}
	cos := 1.0
	if mistake == CodeProbeNotAligned {
		cos = math.Cos(uniform(rng, 25, 45) * math.Pi / 180)
	}
	type pt struct{ I, z float64 }
	pts := []pt{{0.5, 0}, {1, 0}, {1.5, 0}, {2, 0}, {2.5, 0}, {2, 0.03}, {2, 0.06}}
	slip := rng.IntN(len(pts))
	var out []map[string]Quantity
	for i, p := range pts {
		B := coilField(N, R, p.I, p.z) * cos * (1 + 0.01*rng.NormFloat64())
		if mistake == CodeSignReversed {
			B = -B
		}
		shown := round(B*1e3, 0.001)
		if mistake == CodeDecimalSlipPoint && i == slip {
			shown *= 10
		}
		if mistake == CodeOutlierPoint && i == slip {
			shown = round(shown*uniform(rng, 0.4, 0.7), 0.001) // read at the wrong position
		}
		v := map[string]Quantity{"current": qty(p.I, "A"), "field": qty(shown, "mT"), "position": qty(p.z*100, "cm")}
		switch mistake {
		case CodeDecadeSlip:
			v["field"] = qty(shown, "G") // read in millitesla, typed as gauss
		case CodeCoilWireFormula:
			// The group's centre formula, used at every position.
			v["reported_theory"] = qty(sig3(Mu0*N*p.I/(2*math.Pi*R)*1e3), "mT")
		case CodeCoilDiameterInFormula:
			v["reported_theory"] = qty(sig3(Mu0*N*p.I/(2*2*R)*1e3), "mT")
		}
		out = append(out, v)
	}
	return c, out
}
