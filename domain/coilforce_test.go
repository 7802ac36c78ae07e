package domain_test

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	. "example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"
)

// forceBench is the worked example of PHYSICS.md §2(a) [derived]:
// N = 100, L = 0.040 m, B = 0.120 T, so N·B·L = 0.480 N/A and F(5 A) = 2.40 N.
func forceBench() Bench {
	return Bench{Label: "B1", Experiment: "coil_force", Constants: map[string]Quantity{
		"turns":          {Value: 100, Unit: "1"},
		"segment_length": {Value: 4.0, Unit: "cm"},
		"gap_field":      {Value: 120, Unit: "mT"},
	}}
}

// forceReadings simulates a run at 0.5–5 A: F = scale·0.480·I + offset,
// with Gaussian noise of sd newtons.
func forceReadings(scale, offset, sd float64, seed uint64) []Reading {
	rng := rand.New(rand.NewPCG(seed, 1))
	t0 := time.Date(2026, 3, 4, 14, 0, 0, 0, time.UTC)
	var rs []Reading
	for i := 0; i <= 10; i++ {
		I := 0.5 * float64(i)
		F := scale*0.480*I + offset + sd*rng.NormFloat64()
		rs = append(rs, Reading{
			ID:         fmt.Sprintf("r%d", i),
			Values:     ValuesOf(map[string]Quantity{"current": {Value: I, Unit: "A"}, "force": {Value: F, Unit: "N"}}),
			ReceivedAt: t0.Add(time.Duration(i) * time.Minute),
		})
	}
	return rs
}

func TestCoilForceWorkedExample(t *testing.T) {
	a := Assess(forceBench(), forceReadings(1, 0, 0, 1), DefaultTolerance())
	// [derived] PHYSICS.md §2(a): N·B·L = 100 × 0.120 T × 0.040 m = 0.480 N/A.
	if RelErr(a.Predicted.Value, 0.480) > 1e-12 {
		t.Errorf("predicted slope = %g N/A, want 0.480", a.Predicted.Value)
	}
	// u/NBL = hypot(3 %, 2 %) from the documented defaults [derived].
	if want := 0.480 * math.Hypot(0.03, 0.02); RelErr(a.Predicted.Uncertainty, want) > 1e-12 {
		t.Errorf("predicted u = %g, want %g", a.Predicted.Uncertainty, want)
	}
	// F(5 A) = 2.40 N [derived].
	if f := a.Fit.Intercept + a.Fit.Slope*5; math.Abs(f-2.40) > 1e-12 {
		t.Errorf("fitted F(5 A) = %g N, want 2.40", f)
	}
	if a.Verdict != Consistent {
		t.Errorf("verdict = %v (%s), want consistent", a.Verdict.Label(), a.Reason)
	}
}

func TestCoilForceVerdicts(t *testing.T) {
	for _, tc := range []struct {
		name          string
		scale, offset float64
		readings      int
		want          Verdict
		wantCode      string
	}{
		{name: "clean", scale: 1, want: Consistent},
		{name: "sensor not zeroed", scale: 1, offset: 0.8, want: Check, wantCode: CodeSensorNotZeroed},
		{name: "segment half as long as set", scale: 0.5, want: Off, wantCode: CodeLengthDoubled},
		{name: "slightly off", scale: 1.08, want: Check, wantCode: CodeFieldProbeTilted},
		{name: "two readings", scale: 1, readings: 2, want: NeedData},
	} {
		t.Run(tc.name, func(t *testing.T) {
			rs := forceReadings(tc.scale, tc.offset, 0.003, 7)
			if tc.readings > 0 {
				rs = rs[:tc.readings]
			}
			a := Assess(forceBench(), rs, DefaultTolerance())
			if a.Verdict != tc.want {
				t.Errorf("verdict = %s, want %s (%s)", a.Verdict.Label(), tc.want.Label(), a.Reason)
			}
			var codes []string
			for _, d := range a.Diagnoses {
				codes = append(codes, d.Code)
			}
			if tc.wantCode == "" && len(codes) > 0 || tc.wantCode != "" && (len(codes) == 0 || codes[0] != tc.wantCode) {
				t.Errorf("diagnoses = %v, want [%s]", codes, tc.wantCode)
			}
		})
	}
}

func TestCoilForceAllAtOneCurrent(t *testing.T) {
	rs := forceReadings(1, 0, 0.003, 3)
	for i := range rs {
		rs[i].Values.Set("current", Quantity{Value: 2, Unit: "A"})
	}
	if a := Assess(forceBench(), rs, DefaultTolerance()); a.Verdict != NeedData {
		t.Errorf("verdict = %s, want need data", a.Verdict.Label())
	}
}

func TestValidateBench(t *testing.T) {
	for _, tc := range []struct {
		name      string
		edit      func(*Bench)
		wantField string // "" means valid
	}{
		{"defaults are valid", func(b *Bench) {}, ""},
		{"negative turns", func(b *Bench) { b.Constants["turns"] = Quantity{Value: -5, Unit: "1"} }, `b.constants["turns"].value`},
		{"fractional turns", func(b *Bench) { b.Constants["turns"] = Quantity{Value: 10.5, Unit: "1"} }, `b.constants["turns"].value`},
		{"NaN length", func(b *Bench) { b.Constants["segment_length"] = Quantity{Value: math.NaN(), Unit: "cm"} }, `b.constants["segment_length"].value`},
		{"missing unit", func(b *Bench) { b.Constants["gap_field"] = Quantity{Value: 0.1} }, `b.constants["gap_field"].unit`},
		{"wrong dimension", func(b *Bench) { b.Constants["gap_field"] = Quantity{Value: 0.1, Unit: "cm"} }, `b.constants["gap_field"].unit`},
		{"gauss typed as tesla", func(b *Bench) { b.Constants["gap_field"] = Quantity{Value: 1200, Unit: "T"} }, `b.constants["gap_field"].value`},
		{"unknown constant", func(b *Bench) { b.Constants["colour"] = Quantity{Value: 1, Unit: "1"} }, `b.constants["colour"]`},
		{"unknown experiment", func(b *Bench) { b.Experiment = "levitation" }, "b.experiment"},
		{"empty label", func(b *Bench) { b.Label = "" }, "b.label"},
		{"row out of grid", func(b *Bench) { b.Row = 99 }, "b.row"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			b := forceBench()
			tc.edit(&b)
			_, err := ValidateBench("b", b)
			checkField(t, err, tc.wantField)
		})
	}
}

func TestValidateReading(t *testing.T) {
	ok := func() map[string]Quantity {
		return map[string]Quantity{"current": {Value: 1, Unit: "A"}, "force": {Value: 0.48, Unit: "N"}}
	}
	for _, tc := range []struct {
		name      string
		edit      func(map[string]Quantity)
		wantField string
	}{
		{"valid", func(map[string]Quantity) {}, ""},
		{"milliamps accepted", func(m map[string]Quantity) { m["current"] = Quantity{Value: 500, Unit: "mA"} }, ""},
		{"NaN force", func(m map[string]Quantity) { m["force"] = Quantity{Value: math.NaN(), Unit: "N"} }, `values["force"].value`},
		{"Inf current", func(m map[string]Quantity) { m["current"] = Quantity{Value: math.Inf(1), Unit: "A"} }, `values["current"].value`},
		{"missing force", func(m map[string]Quantity) { delete(m, "force") }, `values["force"]`},
		{"missing unit", func(m map[string]Quantity) { m["force"] = Quantity{Value: 1} }, `values["force"].unit`},
		{"unknown unit", func(m map[string]Quantity) { m["force"] = Quantity{Value: 1, Unit: "lbf"} }, `values["force"].unit`},
		{"mA typed as A", func(m map[string]Quantity) { m["current"] = Quantity{Value: 500, Unit: "A"} }, `values["current"].value`},
		{"extra value", func(m map[string]Quantity) { m["voltage"] = Quantity{Value: 1, Unit: "V"} }, `values["voltage"]`},
		{"negative uncertainty", func(m map[string]Quantity) { m["force"] = Quantity{Value: 1, Unit: "N", Uncertainty: -1} }, `values["force"].uncertainty`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			m := ok()
			tc.edit(m)
			checkField(t, ValidateReading("values", forceBench(), ValuesOf(m)), tc.wantField)
		})
	}
}

func checkField(t *testing.T, err error, wantField string) {
	t.Helper()
	if wantField == "" {
		if err != nil {
			t.Errorf("got error %v, want none", err)
		}
		return
	}
	var ve *ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("got %v, want a ValidationError naming %s", err, wantField)
	}
	for _, v := range ve.Violations {
		if v.Field == wantField {
			return
		}
	}
	t.Errorf("violations %+v name no field %s", ve.Violations, wantField)
}

func TestFormatMeasurement(t *testing.T) {
	for _, tc := range []struct {
		v, u float64
		unit string
		want string
	}{
		{0.4521, 0.0063, "N/A", "0.452 ± 0.006 N/A"},
		{0.48, 0.0173, "", "0.480 ± 0.017"},
		{1.7588e11, 0.052e11, "C/kg", "(1.76 ± 0.05)e11 C/kg"},
		{1.7588e11, 0.022e11, "C/kg", "(1.759 ± 0.022)e11 C/kg"},
		{12.34, 3.2, "cm", "12 ± 3 cm"},
		{2.0, 0, "N", "2 N"},
		{1.169e-3, 0.02e-3, "T", "0.001169 ± 0.000020 T"},
		{2.5e-5, 0.1e-5, "T", "(2.50 ± 0.10)e-5 T"},
		{-0.0123, 0.0042, "N", "-0.012 ± 0.004 N"},
		{-0.0004, 0.003, "N", "-0.000 ± 0.003 N"}, // as fmt's %.3f wrote a rounded negative zero
		{-3.2e6, 0.41e6, "", "(-3.2 ± 0.4)e6"},
	} {
		if got := FormatMeasurement(tc.v, tc.u, tc.unit); got != tc.want {
			t.Errorf("FormatMeasurement(%g, %g, %q) = %q, want %q", tc.v, tc.u, tc.unit, got, tc.want)
		}
	}
}

func TestPlotOfEveryExperiment(t *testing.T) {
	for _, exp := range sim.Experiments() {
		g := simulate(t, exp, "", 11)
		a := Assess(g.Bench, g.Readings, DefaultTolerance())
		if a.Plot == nil || len(a.Plot.Points) != len(g.Readings) {
			t.Errorf("%s: plot %+v, want %d points", exp, a.Plot, len(g.Readings))
			continue
		}
		for _, l := range [][]XY{a.Plot.Theory, a.Plot.Fit, a.Plot.BandLow, a.Plot.BandHigh} {
			if len(l) < 2 {
				t.Errorf("%s: a line of the plot has %d vertices", exp, len(l))
			}
		}
		for _, p := range a.Plot.Points {
			if math.IsNaN(p.X) || math.IsNaN(p.Y) || !(p.UY > 0) || p.ReadingID == "" {
				t.Errorf("%s: point %+v", exp, p)
			}
		}
	}
}
