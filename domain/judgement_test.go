package domain_test

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"testing"

	. "example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"
)

// The checks below each build a group's run the way a group would make the
// mistake, and look at what the judging says about it.

// assessSim simulates and judges one group.
func assessSim(t *testing.T, exp, mistake string, seed uint64) (sim.Group, Assessment) {
	t.Helper()
	g := simulate(t, exp, mistake, seed)
	b, err := ValidateBench("bench", g.Bench)
	if err != nil {
		t.Fatal(err)
	}
	for i, r := range g.Readings {
		if err := ValidateReading(fmt.Sprintf("readings[%d]", i), b, r.Values); err != nil {
			t.Fatal(err)
		}
	}
	return g, Assess(b, g.Readings, DefaultTolerance())
}

func budgetItem(a Assessment, prefix string) (BudgetItem, bool) {
	for _, b := range a.Budget {
		if strings.HasPrefix(b.Input, prefix) {
			return b, true
		}
	}
	return BudgetItem{}, false
}

// TestScatterBeyondInstrumentsStaysOff: half a run taken after the set-up
// changed scatters far beyond what the instruments allow. The judging says
// so as its own diagnosis, judges the result on what the instruments allow
// (off where it is far out, never rescued by the scatter's inflated
// uncertainty), and keeps the inflation in the budget, labelled.
func TestScatterBeyondInstrumentsStaysOff(t *testing.T) {
	for _, exp := range []string{"coil_force", "solenoid"} {
		for seed := uint64(1); seed <= 20; seed++ {
			t.Run(fmt.Sprintf("%s/seed %d", exp, seed), func(t *testing.T) {
				_, a := assessSim(t, exp, CodeScatterBeyond, seed)
				// Judged on what the instruments allow, never milder than
				// on the inflated uncertainty, and never consistent.
				_, _, inflated := Combine(a.Measured, a.Predicted, DefaultTolerance())
				if a.Verdict == Consistent || a.Verdict < inflated || a.Verdict != DefaultTolerance().VerdictOf(a.Z, a.PercentDiff) {
					t.Errorf("verdict %s (on the inflated uncertainty %s), z %.1f (%s)", a.Verdict.Label(), inflated.Label(), a.Z, a.Reason)
				}
				if !topOK(a, CodeScatterBeyond) {
					t.Errorf("diagnoses %v, want %s on top", codesOf(a), CodeScatterBeyond)
				}
				item, ok := budgetItem(a, "scatter beyond the instruments (χ²/ν = ")
				if !ok || !(item.RelU > 0) {
					t.Fatalf("budget %+v has no labelled scatter item", a.Budget)
				}
				// The inflated uncertainty stays in the result, for the
				// grade's precision, and alone it would not have been off.
				if rel := a.Measured.RelUncertainty(); rel < item.RelU {
					t.Errorf("result's relative uncertainty %.3g below the scatter's share %.3g", rel, item.RelU)
				}
			})
		}
	}
}

// TestInflatedUncertaintyWouldHaveHiddenIt shows the fault the scatter check
// mends: judged with the scatter's inflated uncertainty, mixed runs that are
// off read only "check".
func TestInflatedUncertaintyWouldHaveHiddenIt(t *testing.T) {
	hidden, far := 0, 0
	for _, exp := range []string{"coil_force", "solenoid"} {
		for seed := uint64(1); seed <= 20; seed++ {
			_, a := assessSim(t, exp, CodeScatterBeyond, seed)
			if a.Verdict != Off {
				continue
			}
			far++
			if _, _, v := Combine(a.Measured, a.Predicted, DefaultTolerance()); v != Off {
				hidden++
			}
		}
	}
	t.Logf("%d of the %d mixed runs judged off would have read check on the inflated uncertainty", hidden, far)
	if hidden == 0 {
		t.Errorf("no mixed run was hidden by its inflated uncertainty: the test no longer shows the fault")
	}
}

// emRun builds an e/m run at the worked pair (130 turns, 15 cm), every point
// one way or both, with a background bg (T) along the axis and no other
// error; diameters to 0.1 mm.
func emRun(bg float64, bothWays bool) []Reading {
	k := HelmholtzFactor * Mu0 * 130 / 0.150
	var rs []Reading
	for _, V := range []float64{150, 200, 250} {
		for _, I := range []float64{1.0, 1.4, 1.8} {
			dirs := []float64{1}
			if bothWays {
				dirs = []float64{1, -1}
			}
			for _, s := range dirs {
				B := math.Abs(k*I*s + bg)
				d := 2 * math.Sqrt(2*V/ElectronChargeToMass) / B
				rs = append(rs, Reading{ID: fmt.Sprintf("r%d", len(rs)+1), Sequence: uint64(len(rs) + 1),
					Values: ValuesOf(map[string]Quantity{"anode_voltage": Qty(V, "V"), "coil_current": Qty(s*I, "A"),
						"beam_diameter": Qty(Round(d*1000, 0.1), "mm")})})
			}
		}
	}
	return rs
}

func emBench(t *testing.T) Bench {
	t.Helper()
	b, err := ValidateBench("b", Bench{Label: "E1", Experiment: "e_over_m"})
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestOneSlippedReadingIsNamed: one e/m reading with a decimal slipped on
// one of its values is named, with the value, its factor and the reading to
// re-take, instead of being weighted away.
func TestOneSlippedReadingIsNamed(t *testing.T) {
	b := emBench(t)
	for _, tc := range []struct {
		value, label string
		factor       float64
	}{
		{"anode_voltage", "anode voltage", 0.1},
		{"coil_current", "coil current", 0.1},
		{"beam_diameter", "beam diameter", 0.1},
	} {
		for _, at := range []int{0, 4, 8} {
			t.Run(fmt.Sprintf("%s ×%g in reading %d", tc.value, tc.factor, at+1), func(t *testing.T) {
				rs := emRun(0, true)
				q := rs[at].Values.At(tc.value)
				q.Value *= tc.factor
				rs[at].Values.Set(tc.value, q)
				a := Assess(b, rs, DefaultTolerance())
				if len(a.Diagnoses) == 0 || a.Diagnoses[0].Code != CodeDecimalSlipPoint {
					t.Fatalf("diagnoses %v, want %s first (%s)", codesOf(a), CodeDecimalSlipPoint, a.Reason)
				}
				d := a.Diagnoses[0]
				if d.ReadingID != rs[at].ID {
					t.Errorf("reading id %q, want %q", d.ReadingID, rs[at].ID)
				}
				for _, want := range []string{fmt.Sprintf("reading #%d", at+1), tc.label, fmt.Sprintf("typed ×%g", tc.factor)} {
					if !strings.Contains(d.Evidence, want) {
						t.Errorf("evidence %q does not say %q", d.Evidence, want)
					}
				}
				if want := fmt.Sprintf("re-take this point: reading #%d", at+1); d.Action != want {
					t.Errorf("action %q, want %q", d.Action, want)
				}
				if a.Verdict == Consistent {
					t.Errorf("verdict consistent with a slipped reading")
				}
			})
		}
	}
	t.Run("clean run names no reading", func(t *testing.T) {
		a := Assess(b, emRun(0, true), DefaultTolerance())
		if a.Verdict != Consistent || len(a.Diagnoses) != 0 {
			t.Errorf("verdict %s, diagnoses %v; want consistent and none", a.Verdict.Label(), codesOf(a))
		}
	})
}

// TestOutlierWithoutKnownFactor: a reading misread by a factor no slip
// gives is still named, as an outlier, with the reading to re-take.
func TestOutlierWithoutKnownFactor(t *testing.T) {
	for _, exp := range []string{"coil_force", "e_over_m", "flat_coil"} {
		t.Run(exp, func(t *testing.T) {
			g, a := assessSim(t, exp, CodeOutlierPoint, 3)
			if !topOK(a, CodeOutlierPoint) {
				t.Fatalf("diagnoses %v, want %s on top (%s)", codesOf(a), CodeOutlierPoint, a.Reason)
			}
			d := a.Diagnoses[0]
			if d.ReadingID == "" || !strings.HasPrefix(d.Action, "re-take this point: reading #") {
				t.Errorf("diagnosis %+v names no reading to re-take", d)
			}
			found := false
			for _, r := range g.Readings {
				found = found || r.ID == d.ReadingID
			}
			if !found {
				t.Errorf("reading id %q is none of the group's", d.ReadingID)
			}
		})
	}
}

// TestMassAsForce: a force sensor read in kilograms or grams and typed as
// newtons, next to a true decade slip: each is named, with the other beside
// it, never one of them silently.
func TestMassAsForce(t *testing.T) {
	b, err := ValidateBench("b", Bench{Label: "F1", Experiment: "coil_force"})
	if err != nil {
		t.Fatal(err)
	}
	// N·B·L = 100 × 0.120 T × 0.040 m = 0.48 N/A [derived, PHYSICS.md §2(a)];
	// up to 1 A, so that grams stay under the sensor's 100 "N".
	run := func(scale float64) []Reading {
		var rs []Reading
		for i, I := range []float64{0, 0.2, 0.4, 0.6, 0.8, 1.0} {
			rs = append(rs, Reading{ID: fmt.Sprintf("f%d", i), Sequence: uint64(i + 1), Values: ValuesOf(map[string]Quantity{
				"current": Qty(I, "A"), "force": Qty(Round(0.48*I*scale, 1e-4), "N")})})
		}
		return rs
	}
	for _, tc := range []struct {
		name        string
		scale       float64
		first, also string
	}{
		{"kilograms typed as newtons", 1 / StandardGravity, CodeMassAsForce, CodeDecadeSlip},
		{"grams typed as newtons", 1000 / StandardGravity, CodeMassAsForce, CodeDecadeSlip},
		{"newtons multiplied by g", StandardGravity, CodeMassAsForce, CodeDecadeSlip},
		{"a decade slip", 0.1, CodeDecadeSlip, CodeMassAsForce},
	} {
		t.Run(tc.name, func(t *testing.T) {
			a := Assess(b, run(tc.scale), DefaultTolerance())
			if len(a.Diagnoses) == 0 || a.Diagnoses[0].Code != tc.first {
				t.Fatalf("diagnoses %v, want %s first (%s)", codesOf(a), tc.first, a.Reason)
			}
			if !slicesContains(a.Diagnoses[0].Alternatives, tc.also) {
				t.Errorf("alternatives %v, want %s beside it", a.Diagnoses[0].Alternatives, tc.also)
			}
		})
	}
}

func slicesContains(s []string, v string) bool {
	for _, x := range s {
		if x == v {
			return true
		}
	}
	return false
}

// TestBackgroundAlreadyAveraged: a group that took every point with the
// current both ways has averaged a background out; it is shown as a note
// and the bench is not downgraded. One way only, the same background is a
// finding.
func TestBackgroundAlreadyAveraged(t *testing.T) {
	b := emBench(t)
	both := Assess(b, emRun(40e-6, true), DefaultTolerance())
	if both.Verdict != Consistent || len(both.Diagnoses) != 0 {
		t.Errorf("both ways: verdict %s, diagnoses %v; want consistent, none (%s)", both.Verdict.Label(), codesOf(both), both.Reason)
	}
	note := ""
	for _, n := range both.Notes {
		if strings.HasPrefix(n, "background along the axis") {
			note = n
		}
	}
	if !strings.Contains(note, "µT along the axis") || !strings.Contains(note, "averages out") {
		t.Errorf("notes %q: want the measured background, averaged out", both.Notes)
	}
	one := Assess(b, emRun(40e-6, false), DefaultTolerance())
	if !topOK(one, CodeBackgroundAxial) || one.Verdict == Consistent {
		t.Errorf("one way: verdict %s, diagnoses %v; want %s (%s)", one.Verdict.Label(), codesOf(one), CodeBackgroundAxial, one.Reason)
	}
}

// TestSafetyAtTheLimit: a reading at a limit within its meter's resolution
// is a caution, not unsafe; past it, unsafe; the message always shows the
// digits that differ.
func TestSafetyAtTheLimit(t *testing.T) {
	bench := func(res float64) Bench {
		b, err := ValidateBench("b", Bench{Label: "F1", Experiment: "coil_force",
			Constants: map[string]Quantity{"current_resolution": Qty(res, "A"), "max_current": Qty(5, "A")}})
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	run := func(last float64) []Reading {
		var rs []Reading
		for i, I := range []float64{0, 1, 2, 3, 4, last} {
			rs = append(rs, Reading{ID: fmt.Sprintf("f%d", i), Sequence: uint64(i + 1), Values: ValuesOf(map[string]Quantity{
				"current": Qty(I, "A"), "force": Qty(Round(0.48*I, 0.001), "N")})})
		}
		return rs
	}
	for _, tc := range []struct {
		name         string
		res, last    float64
		unsafe       bool
		caution      []string
		reasonDigits string
	}{
		{"5.004 A on a 0.01 A meter is at the limit", 0.01, 5.004, false, []string{"At the limit", "5.004 A", "limit of 5 A", "reading #6"}, ""},
		{"5.01 A on a 0.01 A meter is at the limit", 0.01, 5.01, false, []string{"At the limit", "5.01 A"}, ""},
		{"5.02 A on a 0.01 A meter is above it", 0.01, 5.02, true, []string{"equipment maker"}, "5.02 A (reading #6) is above the bench limit of 5 A"},
		{"5.004 A on a 0.001 A meter is above it", 0.001, 5.004, true, []string{"equipment maker"}, "5.004 A (reading #6) is above the bench limit of 5 A"},
		{"5.0004 A on a 0.0001 A meter is above it", 0.0001, 5.0004, true, nil, "5.0004 A"},
		{"−5.004 A reversed is at the limit too", 0.01, -5.004, false, []string{"At the limit", "5.004 A"}, ""},
	} {
		t.Run(tc.name, func(t *testing.T) {
			a := Assess(bench(tc.res), run(tc.last), DefaultTolerance())
			if got := a.Verdict == Unsafe; got != tc.unsafe {
				t.Errorf("unsafe = %v, want %v (%s)", got, tc.unsafe, a.Reason)
			}
			for _, want := range tc.caution {
				if !strings.Contains(a.Caution, want) {
					t.Errorf("caution %q does not say %q", a.Caution, want)
				}
			}
			if tc.reasonDigits != "" && !strings.Contains(a.Reason, tc.reasonDigits) {
				t.Errorf("reason %q does not say %q", a.Reason, tc.reasonDigits)
			}
			if strings.Contains(a.Reason+a.Caution, "5 A is above") || strings.Contains(a.Reason+a.Caution, "5 A (reading #6) is above") {
				t.Errorf("message hides the difference: %q %q", a.Reason, a.Caution)
			}
		})
	}
	t.Run("heater has no margin", func(t *testing.T) {
		b := emBench(t)
		rs := emRun(0, true)
		rs[0].Values.Set("heater_voltage", Qty(6.31, "V"))
		if a := Assess(b, rs, DefaultTolerance()); a.Verdict != Unsafe || !strings.Contains(a.Reason, "6.31 V") {
			t.Errorf("verdict %s (%s), want unsafe at 6.31 V", a.Verdict.Label(), a.Reason)
		}
	})
}

// TestUnitSlipHints: a value typed past what the set-up can give is refused
// with the likeliest slip for its size.
func TestUnitSlipHints(t *testing.T) {
	for _, tc := range []struct {
		experiment, value string
		q                 Quantity
		want              string
	}{
		{"solenoid", "field", Qty(4500, "mT"), "(above 0.1 T is impossible without iron: was it in µT typed as mT?)"},
		{"solenoid", "field", Qty(0.45, "T"), "was it in mT typed as T?"},
		{"straight_wire", "field", Qty(0.5, "T"), "was it in G typed as T, or mT typed as T?"},
		{"e_over_m", "beam_diameter", Qty(80, "cm"), "was it in mm typed as cm?"},
		{"e_over_m", "anode_voltage", Qty(250, "kV"), "was it in V typed as kV?"},
		{"e_over_m", "coil_current", Qty(1500, "A"), "was it in mA typed as A?"},
		{"coil_force", "force", Qty(480, "N"), "was it in mN typed as N?"},
		{"straight_wire", "distance", Qty(4, "m"), "was it in cm typed as m?"},
	} {
		t.Run(fmt.Sprintf("%s %s %g %s", tc.experiment, tc.value, tc.q.Value, tc.q.Unit), func(t *testing.T) {
			b, err := ValidateBench("b", Bench{Label: "X1", Experiment: tc.experiment})
			if err != nil {
				t.Fatal(err)
			}
			e, _ := LookupExperiment(tc.experiment)
			values := map[string]Quantity{}
			for _, s := range e.Values {
				if !s.Optional {
					values[s.Name] = Quantity{Value: math.Max(s.Usual[0], 1e-3), Unit: SIUnit(s.Dim)}
				}
			}
			values[tc.value] = tc.q
			err = ValidateReading("values", b, ValuesOf(values))
			var ve *ValidationError
			if !errors.As(err, &ve) {
				t.Fatalf("err = %v, want a ValidationError", err)
			}
			var reasons []string
			for _, v := range ve.Violations {
				if v.Field == fmt.Sprintf("values[%q].value", tc.value) {
					reasons = append(reasons, v.Reason)
				}
			}
			if len(reasons) != 1 || !strings.Contains(reasons[0], tc.want) {
				t.Errorf("violations %+v; want one on %s saying %q", ve.Violations, tc.value, tc.want)
			}
		})
	}
}

// TestDecadeSlipNamesTheUnits: a field run off by a power of ten names the
// unit slip that gives that power, from the meter's own unit first.
func TestDecadeSlipNamesTheUnits(t *testing.T) {
	for _, tc := range []struct {
		exp  string
		want string
	}{
		{"straight_wire", "a field in G typed as mT"},
		{"solenoid", "a field in mT typed as G"},
		{"flat_coil", "a field in mT typed as G"},
	} {
		t.Run(tc.exp, func(t *testing.T) {
			_, a := assessSim(t, tc.exp, CodeDecadeSlip, 2)
			if len(a.Diagnoses) == 0 || a.Diagnoses[0].Code != CodeDecadeSlip || !strings.Contains(a.Diagnoses[0].Evidence, tc.want) {
				t.Errorf("diagnoses %+v, want %s saying %q", a.Diagnoses, CodeDecadeSlip, tc.want)
			}
		})
	}
}

// TestSlippedPointIsNotAFactor: one slipped force in a short coil run drags
// the slope to about half of N·B·L, the factor of a doubled length. The
// slipped reading is named first, and the run without it shows no factor.
func TestSlippedPointIsNotAFactor(t *testing.T) {
	b, err := ValidateBench("b", Bench{Label: "C1", Experiment: "coil_force"})
	if err != nil {
		t.Fatal(err)
	}
	var rs []Reading
	for i, I := range []float64{0, 1, 2, 3, 4, 5} {
		F := 0.48*I + 0.002*float64(i%2) // N·B·L = 0.48 N/A [derived, PHYSICS.md §2(a)]
		if I == 2 {
			F *= 10
		}
		rs = append(rs, Reading{ID: fmt.Sprintf("c1-%d", i), Sequence: uint64(i + 1), Values: ValuesOf(map[string]Quantity{
			"current": Qty(I, "A"), "force": Qty(F, "N")})})
	}
	a := Assess(b, rs, DefaultTolerance())
	if cs := codesOf(a); len(cs) == 0 || cs[0] != CodeDecimalSlipPoint || slicesContains(cs, CodeLengthDoubled) {
		t.Errorf("diagnoses %v, want %s alone (%s)", cs, CodeDecimalSlipPoint, a.Reason)
	}
	if a.Diagnoses[0].ReadingID != "c1-2" {
		t.Errorf("reading %q, want c1-2", a.Diagnoses[0].ReadingID)
	}
}

// TestSkippedZeroInThreeReadings: a run of three readings with a skipped
// zero still shows it: with so few readings the instruments, not the
// scatter, set the intercept's uncertainty.
func TestSkippedZeroInThreeReadings(t *testing.T) {
	b, err := ValidateBench("b", Bench{Label: "F1", Experiment: "coil_force"})
	if err != nil {
		t.Fatal(err)
	}
	var rs []Reading
	for i, I := range []float64{0, 1, 2} {
		// N·B·L = 0.48 N/A [derived, PHYSICS.md §2(a)]; 0.7 N left on the sensor.
		rs = append(rs, Reading{ID: fmt.Sprintf("z%d", i), Values: ValuesOf(map[string]Quantity{"current": Qty(I, "A"), "force": Qty(0.48*I+0.7, "N")})})
	}
	a := Assess(b, rs, DefaultTolerance())
	if len(a.Diagnoses) == 0 || a.Diagnoses[0].Code != CodeSensorNotZeroed || a.Headline != "sensor not zeroed" {
		t.Errorf("diagnoses %v, headline %q; want %s (%s)", codesOf(a), a.Headline, CodeSensorNotZeroed, a.Reason)
	}
}

// TestPlotInTypedUnits: the bench detail's plot shows each axis in the unit
// the group typed: a solenoid's field read in mT is plotted in mT.
func TestPlotInTypedUnits(t *testing.T) {
	g, a := assessSim(t, "solenoid", "", 4)
	if a.Plot == nil {
		t.Fatal("no plot")
	}
	if a.Plot.XLabel != "B_theory (mT)" || a.Plot.YLabel != "B measured (mT)" {
		t.Errorf("labels %q, %q; want both axes in mT", a.Plot.XLabel, a.Plot.YLabel)
	}
	typed := g.Readings[0].Values.At("field").Value // mT, as the group typed it
	if got := a.Plot.Points[0].Y; RelErr(got, typed) > 1e-12 {
		t.Errorf("first point at %g, want %g mT as typed", got, typed)
	}
	_, c := assessSim(t, "coil_force", "", 4)
	if c.Plot.XLabel != "current I (A)" || c.Plot.YLabel != "force F (N)" {
		t.Errorf("coil force labels %q, %q; want A and N as typed", c.Plot.XLabel, c.Plot.YLabel)
	}
}
