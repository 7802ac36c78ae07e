package domain

import (
	"errors"
	"math"
	"testing"
)

// FuzzAssess feeds arbitrary numbers and units to every experiment's entry
// points: validation must reject non-finite or impossible values naming a
// field, and Assess must never panic on what validation lets through.
func FuzzAssess(f *testing.F) {
	f.Add("coil_force", 1.0, "A", 0.48, "N", 100.0)
	f.Add("e_over_m", math.NaN(), "V", math.Inf(1), "cm", -3.0)
	f.Add("straight_wire", 1e308, "mA", -1e-308, "G", 0.0)
	f.Add("solenoid", -0.0, "", 5.0, "T", 1e9)
	f.Add("flat_coil", 2.0, "kV", 3.0, "µT", 7.0)
	f.Fuzz(func(t *testing.T, exp string, v1 float64, u1 string, v2 float64, u2 string, c float64) {
		e, ok := LookupExperiment(exp)
		if !ok {
			return
		}
		consts := map[string]Quantity{}
		for i, s := range e.Constants {
			if i == 0 {
				consts[s.Name] = Quantity{Value: c, Unit: s.Unit}
			}
		}
		b, err := ValidateBench("b", Bench{Label: "F1", Experiment: exp, Constants: consts})
		checkNamed(t, err)
		if err != nil {
			b, _ = ValidateBench("b", Bench{Label: "F1", Experiment: exp})
		}
		values := map[string]Quantity{}
		for i, s := range e.Values {
			switch {
			case i == 0:
				values[s.Name] = Quantity{Value: v1, Unit: u1}
			case i == 1:
				values[s.Name] = Quantity{Value: v2, Unit: u2}
			case !s.Optional:
				values[s.Name] = Quantity{Value: 1, Unit: s.Unit}
			}
		}
		err = ValidateReading("values", b, ValuesOf(values))
		checkNamed(t, err)
		if (math.IsNaN(v1) || math.IsInf(v1, 0)) && err == nil {
			t.Fatalf("non-finite value %v accepted", v1)
		}
		var rs []Reading
		if err == nil {
			for range 4 {
				rs = append(rs, Reading{Values: ValuesOf(values)})
			}
		}
		a := Assess(b, rs, DefaultTolerance())
		if a.Verdict == VerdictUnspecified {
			t.Fatalf("Assess gave no verdict")
		}
	})
}

func checkNamed(t *testing.T, err error) {
	if err == nil {
		return
	}
	var ve *ValidationError
	if !errors.As(err, &ve) || len(ve.Violations) == 0 {
		t.Fatalf("error %v is not a ValidationError with fields", err)
	}
	for _, v := range ve.Violations {
		if v.Field == "" || v.Reason == "" {
			t.Fatalf("violation %+v lacks a field or a reason", v)
		}
	}
}
