package domain_test

import (
	"math"
	"testing"
	"time"

	. "example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"
)

func TestValidatePolicy(t *testing.T) {
	if err := ValidatePolicy(DefaultPolicy()); err != nil {
		t.Fatalf("the default policy is invalid: %v", err)
	}
	for _, tc := range []struct {
		name      string
		edit      func(*Policy)
		wantField string
	}{
		{"negative points", func(p *Policy) { p.Points.Accuracy = -1 }, "points.accuracy"},
		{"no points", func(p *Policy) { p.Points = PolicyPoints{} }, "points"},
		{"unknown experiment", func(p *Policy) { p.RequiredReadings = map[string]int{"levitation": 3} }, `required_readings["levitation"]`},
		{"zero readings", func(p *Policy) { p.RequiredReadings = map[string]int{"solenoid": 0} }, `required_readings["solenoid"]`},
		{"bands out of order", func(p *Policy) { p.Accuracy.HalfPercent = 30 }, "accuracy"},
		{"NaN precision", func(p *Policy) { p.Precision.FullPercent = math.NaN() }, "precision.full_at_or_below_percent"},
		{"deduction above 1", func(p *Policy) { p.Quality.DeductPerDiagnosis = 2 }, "data_quality.deduct_fraction_per_diagnosis"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			p := DefaultPolicy()
			p.RequiredReadings = map[string]int{"coil_force": 8}
			tc.edit(&p)
			checkField(t, ValidatePolicy(p), tc.wantField)
		})
	}
}

func TestGradeOf(t *testing.T) {
	clean := simulate(t, "coil_force", "", 21)
	zero := simulate(t, "coil_force", CodeSensorNotZeroed, 21)
	half := simulate(t, "coil_force", CodeLengthDoubled, 21)
	for _, tc := range []struct {
		name      string
		g         sim.Group
		keep      int
		wantTotal float64
		tol       float64
	}{
		// 11 readings of a clean run: every part full [derived from DefaultPolicy()].
		{"clean complete run", clean, 11, 10, 0},
		// 4 of 8 readings: half the completeness points.
		{"half a run", clean, 4, 9, 0.6},
		// One diagnosis costs half the data-quality points.
		{"sensor not zeroed", zero, 11, 9, 0.01},
		// ×0.5: no accuracy points.
		{"segment doubled", half, 11, 5, 0.01},
	} {
		t.Run(tc.name, func(t *testing.T) {
			a := Assess(tc.g.Bench, tc.g.Readings[:tc.keep], DefaultTolerance())
			g := GradeOf("coil_force", a, 0, nil, DefaultPolicy())
			if math.Abs(g.Final-tc.wantTotal) > tc.tol {
				t.Errorf("grade %.2f (parts %.2f %.2f %.2f %.2f), want %.2f ± %.2f", g.Final, g.Completeness, g.Accuracy, g.Precision, g.Quality, tc.wantTotal, tc.tol)
			}
			if g.Max != 10 || len(g.Feedback) == 0 {
				t.Errorf("max %g, feedback %q", g.Max, g.Feedback)
			}
		})
	}
	// Unsafe readings are deducted; an override wins and keeps its audit.
	a := Assess(clean.Bench, clean.Readings, DefaultTolerance())
	g := GradeOf("coil_force", a, 2, nil, DefaultPolicy())
	if g.Final != 8 {
		t.Errorf("two unsafe readings: %g, want 8", g.Final)
	}
	o := Override{Points: 9.5, Reason: "coil swapped by staff mid-run", Author: "instructor", At: time.Now(), Previous: 8}
	g = GradeOf("coil_force", a, 2, []Override{o}, DefaultPolicy())
	if g.Final != 9.5 || g.Computed != 8 || g.Override == nil || g.Override.Reason != o.Reason {
		t.Errorf("override: final %g computed %g override %+v", g.Final, g.Computed, g.Override)
	}
	checkField(t, ValidateOverride(Override{Points: 11, Reason: "x"}, 10), "points")
	checkField(t, ValidateOverride(Override{Points: 5}, 10), "reason")
}

func TestRoundToUncertainty(t *testing.T) {
	for _, tc := range []struct {
		v, u   float64
		vs, us string
	}{
		{0.48217, 0.0173, "0.482", "0.017"},
		{1.7588e11, 0.052e11, "176000000000", "5000000000"},
		{12.34, 3.2, "12", "3"},
		{0.9961, 0.0081, "0.996", "0.008"},
		{5, 0, "5", ""},
	} {
		vs, us := RoundToUncertainty(tc.v, tc.u)
		if vs != tc.vs || us != tc.us {
			t.Errorf("RoundToUncertainty(%g, %g) = %s, %s; want %s, %s", tc.v, tc.u, vs, us, tc.vs, tc.us)
		}
	}
}

// TestDefaultsAreCopies: a caller that changes the defaults it was given
// changes nobody else's.
func TestDefaultsAreCopies(t *testing.T) {
	p := DefaultPolicy()
	p.RequiredReadings["coil_force"] = 99
	p.Points.Accuracy = 0
	if q := DefaultPolicy(); q.RequiredReadings["coil_force"] != 8 || q.Points.Accuracy != 4 {
		t.Errorf("DefaultPolicy after a caller changed its copy: %+v", q)
	}
	tol := DefaultTolerance()
	tol.ZOff = 100
	if DefaultTolerance().ZOff != 3 {
		t.Errorf("DefaultTolerance after a caller changed its copy: %+v", DefaultTolerance())
	}
}
