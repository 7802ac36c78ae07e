package domain

import (
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestShapeThresholdsMatchGonum checks the shape tests' critical values
// (tables.go and the asymptotic forms past it) against gonum's
// stat/distuv, a well-kept library's distributions, and against printed
// table values.
func TestShapeThresholdsMatchGonum(t *testing.T) {
	for nu := 1; nu <= 600; nu++ {
		tol := 1e-9
		if nu >= len(tTwoSided001) {
			tol = 1e-4 // the asymptotic forms
		}
		v := float64(nu)
		if got, want := tShape(nu), (distuv.StudentsT{Mu: 0, Sigma: 1, Nu: v}.Quantile(1 - falseAlarm/2)); relErr(got, want) > tol {
			t.Errorf("tShape(%d) = %.8g, gonum distuv %.8g", nu, got, want)
		}
		if tol > 1e-9 {
			tol = 2e-3 // Wilson–Hilferty
		}
		if got, want := chi2Critical(chi2Upper001[:], zUpper001, nu), (distuv.ChiSquared{K: v}.Quantile(1 - falseAlarm)); relErr(got, want) > tol {
			t.Errorf("χ² 0.1 %% point, ν = %d: %.8g, gonum distuv %.8g", nu, got, want)
		}
		if got, want := chi2Critical(chi2Upper05[:], zUpper05, nu), (distuv.ChiSquared{K: v}.Quantile(1 - 0.05)); relErr(got, want) > tol {
			t.Errorf("χ² 5 %% point, ν = %d: %.8g, gonum distuv %.8g", nu, got, want)
		}
	}
	for _, tc := range []struct {
		name      string
		got, want float64
		relTol    float64
	}{
		{"normalCritical(0.001)", normalCritical(falseAlarm), distuv.UnitNormal.Quantile(1 - falseAlarm/2), 1e-9},
		{"normalCritical(0.001/30)", normalCritical(falseAlarm / 30), distuv.UnitNormal.Quantile(1 - falseAlarm/60), 1e-9},
		{"zUpper001", zUpper001, distuv.UnitNormal.Quantile(1 - 0.001), 1e-12},
		{"zUpper05", zUpper05, distuv.UnitNormal.Quantile(1 - 0.05), 1e-12},
		// Upper critical values of Student's t, 10 degrees of freedom, upper
		// tail 0.0005 [pub: NIST/SEMATECH e-Handbook of Statistical Methods
		// §1.3.6.7.2] (from memory).
		{"t, ν = 10, two-sided 0.001", tShape(10), 4.587, 1e-3},
		// Upper critical value of χ², 10 degrees of freedom, 0.999
		// [pub: NIST/SEMATECH e-Handbook §1.3.6.7.4] (from memory).
		{"χ², ν = 10, upper 0.001", chi2Critical(chi2Upper001[:], zUpper001, 10), 29.588, 1e-3},
		{"χ², ν = 10, upper 0.05", chi2Critical(chi2Upper05[:], zUpper05, 10), 18.307, 1e-3},
		// 3.291, the two-sided 0.1 % point of the normal distribution
		// [pub: any statistics table] (from memory).
		{"z, two-sided 0.001", normalCritical(0.001), 3.291, 1e-3},
	} {
		if relErr(tc.got, tc.want) > tc.relTol {
			t.Errorf("%s = %.6g, want %.6g", tc.name, tc.got, tc.want)
		}
	}
}

// TestEveryExperimentIsJudged: each registered experiment has its judging
// in the server's build (judges.go).
func TestEveryExperimentIsJudged(t *testing.T) {
	for _, id := range ExperimentIDs() {
		if judges[id] == nil {
			t.Errorf("experiment %s has no judging", id)
		}
	}
	if len(judges) != len(ExperimentIDs()) {
		t.Errorf("%d judgings for %d experiments", len(judges), len(ExperimentIDs()))
	}
}

// TestDecadeSlipUnitsFromTheMetersFamily: a slip of 10³ on a field read in
// mT names the meter's own unit first, then its family.
func TestDecadeSlipUnitsFromTheMetersFamily(t *testing.T) {
	if got, want := decadeSlipUnits(MagneticField, "mT", 3), "mT typed as T, or µT typed as mT"; got != want {
		t.Errorf("10³ on a field read in mT: %q, want %q", got, want)
	}
}

// TestShortCauses: every catalogue code has a cause of at most four words
// for the room's tiles, and an assessment's headline is never longer.
func TestShortCauses(t *testing.T) {
	for _, e := range Catalogue() {
		if n := len(strings.Fields(e.Short)); n == 0 || n > 4 {
			t.Errorf("%s: short cause %q has %d words, want 1–4", e.Code, e.Short, n)
		}
	}
	for _, label := range []string{"coil current I", "anode voltage V", "heater voltage", "current I"} {
		if n := len(strings.Fields(withoutSymbol(label) + " over limit")); n > 4 {
			t.Errorf("%q over limit: %d words", label, n)
		}
	}
}
