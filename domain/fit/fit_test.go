package fit

import (
	"bufio"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat"
)

// strd is one NIST StRD linear-regression file: its certified values and data.
type strd struct {
	estimate, sd map[string]float64 // by parameter name, "B0", "B1", ...
	residualSD   float64
	rSquared     float64
	x, y         []float64
}

// readStRD parses a NIST StRD linear-regression file from testdata/nist-strd
// [pub: NIST ITL Statistical Reference Datasets, Linear Regression].
func readStRD(t *testing.T, name string) strd {
	t.Helper()
	f, err := os.Open(filepath.Join("testdata", "nist-strd", name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	d := strd{estimate: map[string]float64{}, sd: map[string]float64{}}
	sc := bufio.NewScanner(f)
	inData := false
	num := func(s string) float64 {
		v, err := strconv.ParseFloat(strings.ReplaceAll(s, "E", "e"), 64)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		return v
	}
	for sc.Scan() {
		fields := strings.Fields(sc.Text())
		switch {
		case inData && len(fields) == 2:
			d.y = append(d.y, num(fields[0]))
			d.x = append(d.x, num(fields[1]))
		case len(fields) >= 2 && fields[0] == "Data:" && fields[1] == "y":
			inData = true
		case len(fields) == 3 && len(fields[0]) == 2 && fields[0][0] == 'B':
			d.estimate[fields[0]] = num(fields[1])
			d.sd[fields[0]] = num(fields[2])
		case len(fields) == 3 && fields[0] == "Standard" && fields[1] == "Deviation":
			d.residualSD = num(fields[2])
		case len(fields) == 2 && fields[0] == "R-Squared":
			d.rSquared = num(fields[1])
		}
	}
	if len(d.x) == 0 || len(d.estimate) == 0 {
		t.Fatalf("%s: parsed no data or no certified values", name)
	}
	return d
}

func relErr(got, want float64) float64 {
	if want == 0 {
		return math.Abs(got)
	}
	return math.Abs(got-want) / math.Abs(want)
}

// TestFitAgainstNIST checks the fits against NIST StRD certified values
// [pub: NIST ITL StRD Norris, NoInt1, NoInt2] to 1e-9 relative.
func TestFitAgainstNIST(t *testing.T) {
	const tol = 1e-9
	for _, tc := range []struct {
		file   string
		origin bool
	}{
		{"Norris.dat", false},
		{"NoInt1.dat", true},
		{"NoInt2.dat", true},
	} {
		t.Run(tc.file, func(t *testing.T) {
			d := readStRD(t, tc.file)
			var f Line
			var err error
			if tc.origin {
				f, err = Origin(d.x, d.y)
			} else {
				f, err = Linear(d.x, d.y)
			}
			if err != nil {
				t.Fatal(err)
			}
			check := func(what string, got, want float64) {
				t.Helper()
				if e := relErr(got, want); e > tol {
					t.Errorf("%s = %.15g, certified %.15g (rel err %.2g)", what, got, want, e)
				}
			}
			check("B1", f.Slope, d.estimate["B1"])
			check("sd(B1)", f.SlopeSE, d.sd["B1"])
			if !tc.origin {
				check("B0", f.Intercept, d.estimate["B0"])
				check("sd(B0)", f.InterceptSE, d.sd["B0"])
			}
			check("residual SD", f.ResidualSD, d.residualSD)
			check("R²", f.RSquared, d.rSquared)
		})
	}
}

// TestFitMatchesGonum cross-checks Linear with gonum/stat.LinearRegression
// [pub: gonum v0.17.0], which reports no standard errors.
func TestFitMatchesGonum(t *testing.T) {
	d := readStRD(t, "Norris.dat")
	f, err := Linear(d.x, d.y)
	if err != nil {
		t.Fatal(err)
	}
	a, b := stat.LinearRegression(d.x, d.y, nil, false)
	if relErr(f.Slope, b) > 1e-12 || relErr(f.Intercept, a) > 1e-10 {
		t.Errorf("Linear = (%.15g, %.15g), gonum = (%.15g, %.15g)", f.Intercept, f.Slope, a, b)
	}
	if r2 := stat.RSquared(d.x, d.y, nil, a, b); relErr(f.RSquared, r2) > 1e-12 {
		t.Errorf("R² = %.15g, gonum %.15g", f.RSquared, r2)
	}
}

func TestFitErrors(t *testing.T) {
	for _, tc := range []struct {
		name string
		x, y []float64
	}{
		{"one point", []float64{1}, []float64{2}},
		{"no spread", []float64{1, 1, 1}, []float64{1, 2, 3}},
		{"length mismatch", []float64{1, 2}, []float64{1}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if _, err := Linear(tc.x, tc.y); err == nil {
				t.Error("Linear: got no error")
			}
		})
	}
}

// TestFitPolyPontius checks the quadratic fit against NIST StRD Pontius, a
// load-cell calibration [pub: NIST ITL StRD Pontius], to 1e-9 relative, and
// that the curvature term is found significant.
func TestFitPolyPontius(t *testing.T) {
	d := readStRD(t, "Pontius.dat")
	p, err := Polynomial(d.x, d.y, 2)
	if err != nil {
		t.Fatal(err)
	}
	for k, name := range []string{"B0", "B1", "B2"} {
		if e := relErr(p.Coef[k], d.estimate[name]); e > 1e-9 {
			t.Errorf("%s = %.15g, certified %.15g (rel err %.2g)", name, p.Coef[k], d.estimate[name], e)
		}
		if e := relErr(p.SE[k], d.sd[name]); e > 1e-9 {
			t.Errorf("sd(%s) = %.15g, certified %.15g (rel err %.2g)", name, p.SE[k], d.sd[name], e)
		}
	}
	if e := relErr(p.ResidualSD, d.residualSD); e > 1e-9 {
		t.Errorf("residual SD = %.15g, certified %.15g", p.ResidualSD, d.residualSD)
	}
	if e := relErr(p.RSquared, d.rSquared); e > 1e-9 {
		t.Errorf("R² = %.15g, certified %.15g", p.RSquared, d.rSquared)
	}
	if tq := math.Abs(p.Coef[2] / p.SE[2]); tq < 3 {
		t.Errorf("curvature t = %.1f, want it significant (Pontius is curved)", tq)
	}
	// The straight line through Norris has no significant curvature.
	n := readStRD(t, "Norris.dat")
	q, err := Polynomial(n.x, n.y, 2)
	if err != nil {
		t.Fatal(err)
	}
	if tq := math.Abs(q.Coef[2] / q.SE[2]); tq > 3 {
		t.Errorf("Norris curvature t = %.1f, want < 3", tq)
	}
	// Polynomial of degree 1 agrees with Linear on Norris to 1e-9.
	l, err := Polynomial(n.x, n.y, 1)
	if err != nil {
		t.Fatal(err)
	}
	if relErr(l.Coef[1], n.estimate["B1"]) > 1e-9 || relErr(l.SE[1], n.sd["B1"]) > 1e-9 {
		t.Errorf("Polynomial(1) on Norris = %v ± %v", l.Coef, l.SE)
	}
}

func TestFitRatio(t *testing.T) {
	// NoInt1 through Ratio with equal weights gives the certified slope
	// [pub: NIST ITL StRD NoInt1].
	d := readStRD(t, "NoInt1.dat")
	u := make([]float64, len(d.x))
	for i := range u {
		u[i] = 1
	}
	rho, _, _, err := Ratio(d.x, d.y, u)
	if err != nil {
		t.Fatal(err)
	}
	if relErr(rho, d.estimate["B1"]) > 1e-12 {
		t.Errorf("ρ = %.15g, certified %.15g", rho, d.estimate["B1"])
	}
	// Weights: a point with a huge uncertainty barely counts [derived].
	rho, _, _, _ = Ratio([]float64{1, 2, 3}, []float64{1, 2, 30}, []float64{0.01, 0.01, 1e6})
	if math.Abs(rho-1) > 1e-6 {
		t.Errorf("weighted ρ = %g, want 1", rho)
	}
}
