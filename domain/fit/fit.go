// Package fit is least squares for fluxroom's judging: straight lines with
// and without an intercept, polynomials, a weighted ratio through the
// origin and small linear models, each with its standard errors. It is
// checked against the NIST StRD reference datasets in testdata/nist-strd
// (Norris, Pontius, NoInt1, NoInt2) and against gonum.
package fit

import (
	"errors"
	"math"
)

// Line is a least-squares straight line y = Intercept + Slope·x with the
// standard errors of its parameters.
type Line struct {
	Slope, Intercept     float64
	SlopeSE, InterceptSE float64
	// ResidualSD is the residual standard deviation sqrt(SSR/(n-p)).
	ResidualSD float64
	// RSquared is 1 - SSR/SST with SST about the mean, or about zero for a
	// fit through the origin (the uncentred R² that NIST StRD certifies for
	// NoInt1 and NoInt2).
	RSquared float64
	N        int
	// ThroughOrigin is true when the intercept was fixed at zero.
	ThroughOrigin bool
	// Sxx is Σ(x-x̄)², or Σx² through the origin; the resolution floor of
	// the slope's uncertainty needs it.
	Sxx float64
}

// Errors of the fitting functions.
var (
	ErrTooFewPoints = errors.New("fit: too few points for a fit")
	ErrNoSpread     = errors.New("fit: all x values are the same")
)

// Linear fits y = a + b·x by ordinary least squares. Sums are taken about the
// means so that data with a large offset (NIST StRD Norris) keep full precision.
func Linear(x, y []float64) (Line, error) {
	n := len(x)
	if n != len(y) {
		return Line{}, errors.New("fit: x and y differ in length")
	}
	if n < 2 {
		return Line{}, ErrTooFewPoints
	}
	mx, my := Mean(x), Mean(y)
	var sxx, sxy, syy float64
	for i := range x {
		dx, dy := x[i]-mx, y[i]-my
		sxx += dx * dx
		sxy += dx * dy
		syy += dy * dy
	}
	if sxx == 0 {
		return Line{}, ErrNoSpread
	}
	b := sxy / sxx
	a := my - b*mx
	var ssr float64
	for i := range x {
		r := y[i] - (a + b*x[i])
		ssr += r * r
	}
	f := Line{Slope: b, Intercept: a, N: n, Sxx: sxx}
	if n > 2 {
		s2 := ssr / float64(n-2)
		f.ResidualSD = math.Sqrt(s2)
		f.SlopeSE = math.Sqrt(s2 / sxx)
		f.InterceptSE = math.Sqrt(s2 * (1/float64(n) + mx*mx/sxx))
	}
	if syy > 0 {
		f.RSquared = 1 - ssr/syy
	}
	return f, nil
}

// Origin fits y = b·x through the origin by ordinary least squares.
func Origin(x, y []float64) (Line, error) {
	n := len(x)
	if n != len(y) {
		return Line{}, errors.New("fit: x and y differ in length")
	}
	if n < 1 {
		return Line{}, ErrTooFewPoints
	}
	var sxx, sxy, syy float64
	for i := range x {
		sxx += x[i] * x[i]
		sxy += x[i] * y[i]
		syy += y[i] * y[i]
	}
	if sxx == 0 {
		return Line{}, ErrNoSpread
	}
	b := sxy / sxx
	var ssr float64
	for i := range x {
		r := y[i] - b*x[i]
		ssr += r * r
	}
	f := Line{Slope: b, N: n, Sxx: sxx, ThroughOrigin: true}
	if n > 1 {
		s2 := ssr / float64(n-1)
		f.ResidualSD = math.Sqrt(s2)
		f.SlopeSE = math.Sqrt(s2 / sxx)
	}
	if syy > 0 {
		f.RSquared = 1 - ssr/syy
	}
	return f, nil
}

// Mean is the arithmetic mean of v.
func Mean(v []float64) float64 {
	var s float64
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

// Poly is a least-squares polynomial y = Σ Coef[k]·x^k with standard errors.
type Poly struct {
	Coef, SE   []float64
	ResidualSD float64
	RSquared   float64
	N          int
}

// polyStack bounds the working buffer Polynomial keeps on the stack: a
// quadratic over 60 readings; longer runs allocate.
const polyStack = 3*60 + 60 + 2*9 + 3

// Polynomial fits a polynomial of the given degree by Householder QR on
// columns of x scaled to [-1, 1], which keeps NIST StRD Pontius (x up to 3e6,
// x² up to 1e13) accurate to about 1e-10.
func Polynomial(x, y []float64, degree int) (Poly, error) {
	n, p := len(x), degree+1
	if n != len(y) {
		return Poly{}, errors.New("fit: x and y differ in length")
	}
	if n <= p {
		return Poly{}, ErrTooFewPoints
	}
	var scale float64
	for _, v := range x {
		scale = math.Max(scale, math.Abs(v))
	}
	if scale == 0 {
		return Poly{}, ErrNoSpread
	}
	// The working arrays are one flat buffer, indexed by hand, on the
	// stack for a lab's run: a fit runs after every reading, and the
	// collector's cost goes by the bytes and objects made.
	need := p*n + n + 2*p*p + p
	var stack [polyStack]float64
	var buf []float64
	if need <= len(stack) {
		buf = stack[:need]
	} else {
		buf = make([]float64, need)
	}
	// a is n×p, column-major: a[j*n+i] = (x_i/scale)^j. Each column is the
	// previous one times x/scale: a multiplication per element instead of a
	// math.Pow, on a path taken after every reading.
	a, b, r, c, rinv := buf[:p*n], buf[p*n:p*n+n], buf[p*n+n:p*n+n+p*p], buf[p*n+n+p*p:p*n+n+p*p+p], buf[p*n+n+p*p+p:]
	for i := range x {
		a[i] = 1
	}
	for j := 1; j < p; j++ {
		for i := range x {
			a[j*n+i] = a[(j-1)*n+i] * (x[i] / scale)
		}
	}
	copy(b, y)
	// r is the upper triangle, r[i*p+j] for j ≥ i.
	for k := 0; k < p; k++ {
		ak := a[k*n : (k+1)*n]
		var norm float64
		for i := k; i < n; i++ {
			norm += ak[i] * ak[i]
		}
		norm = math.Sqrt(norm)
		if norm == 0 {
			return Poly{}, ErrNoSpread
		}
		if ak[k] > 0 {
			norm = -norm
		}
		// Householder vector v = a_k - norm·e_k, stored in ak[k:].
		ak[k] -= norm
		vv := 0.0
		for i := k; i < n; i++ {
			vv += ak[i] * ak[i]
		}
		reflect := func(col []float64) {
			var dot float64
			for i := k; i < n; i++ {
				dot += ak[i] * col[i]
			}
			f := 2 * dot / vv
			for i := k; i < n; i++ {
				col[i] -= f * ak[i]
			}
		}
		for j := k + 1; j < p; j++ {
			reflect(a[j*n : (j+1)*n])
		}
		reflect(b)
		r[k*p+k] = norm
		for j := k + 1; j < p; j++ {
			r[k*p+j] = a[j*n+k]
		}
	}
	if math.Abs(r[(p-1)*p+p-1]) < 1e-12*math.Abs(r[0]) {
		return Poly{}, ErrNoSpread
	}
	// Back-substitute R·c = Qᵀy for the scaled coefficients.
	for i := p - 1; i >= 0; i-- {
		s := b[i]
		for j := i + 1; j < p; j++ {
			s -= r[i*p+j] * c[j]
		}
		c[i] = s / r[i*p+i]
	}
	var ssr float64
	for i := p; i < n; i++ {
		ssr += b[i] * b[i]
	}
	// (RᵀR)⁻¹ = R⁻¹R⁻ᵀ; invert the triangle into rinv[i*p+j].
	for i := p - 1; i >= 0; i-- {
		rinv[i*p+i] = 1 / r[i*p+i]
		for j := i + 1; j < p; j++ {
			var s float64
			for k := i + 1; k <= j; k++ {
				s += r[i*p+k] * rinv[k*p+j]
			}
			rinv[i*p+j] = -s / r[i*p+i]
		}
	}
	s2 := ssr / float64(n-p)
	coefSE := make([]float64, 2*p)
	out := Poly{Coef: coefSE[:p:p], SE: coefSE[p:], N: n, ResidualSD: math.Sqrt(s2)}
	for j := 0; j < p; j++ {
		var v float64
		for k := j; k < p; k++ {
			v += rinv[j*p+k] * rinv[j*p+k]
		}
		f := math.Pow(scale, float64(j))
		out.Coef[j] = c[j] / f
		out.SE[j] = math.Sqrt(s2*v) / f
	}
	my := Mean(y)
	var sst float64
	for _, v := range y {
		sst += (v - my) * (v - my)
	}
	if sst > 0 {
		out.RSquared = 1 - ssr/sst
	}
	return out, nil
}

// Ratio fits y = ρ·x through the origin with weights 1/u², the form every
// field experiment takes (measured field against the theory value). When the
// scatter exceeds what the uncertainties allow (χ²/ν > 1), the standard error
// is scaled up by √(χ²/ν); it is never scaled down.
func Ratio(x, y, u []float64) (rho, se, chi2nu float64, err error) {
	if len(x) != len(y) || len(x) != len(u) {
		return 0, 0, 0, errors.New("fit: x, y and u differ in length")
	}
	if len(x) == 0 {
		return 0, 0, 0, ErrTooFewPoints
	}
	var sxx, sxy float64
	for i := range x {
		if !(u[i] > 0) {
			return 0, 0, 0, errors.New("fit: every point needs an uncertainty > 0")
		}
		w := 1 / (u[i] * u[i])
		sxx += w * x[i] * x[i]
		sxy += w * x[i] * y[i]
	}
	if sxx == 0 {
		return 0, 0, 0, ErrNoSpread
	}
	rho = sxy / sxx
	se = math.Sqrt(1 / sxx)
	if len(x) > 1 {
		var chi2 float64
		for i := range x {
			r := (y[i] - rho*x[i]) / u[i]
			chi2 += r * r
		}
		chi2nu = chi2 / float64(len(x)-1)
		if chi2nu > 1 {
			se *= math.Sqrt(chi2nu)
		}
	}
	return rho, se, chi2nu, nil
}

// TrendT is the t statistic of the slope of y against x: how many standard
// errors the trend is from zero. Zero when it cannot be computed.
func TrendT(x, y []float64) float64 {
	f, err := Linear(x, y)
	if err != nil || f.SlopeSE == 0 {
		return 0
	}
	return f.Slope / f.SlopeSE
}

// Model fits y = Σ coef[j]·cols[j] by least squares (normal equations
// with partial pivoting: enough for the two or three well-separated columns
// the shape checks use) and returns the coefficients and standard errors.
func Model(cols [][]float64, y []float64) (coef, se []float64, err error) {
	p, n := len(cols), len(y)
	if n <= p {
		return nil, nil, ErrTooFewPoints
	}
	a := make([][]float64, p)
	for i := range a {
		a[i] = make([]float64, 2*p+1)
		for j := 0; j < p; j++ {
			for k := 0; k < n; k++ {
				a[i][j] += cols[i][k] * cols[j][k]
			}
		}
		a[i][p+i] = 1
		for k := 0; k < n; k++ {
			a[i][2*p] += cols[i][k] * y[k]
		}
	}
	// Gauss–Jordan on [XᵀX | I | Xᵀy] gives (XᵀX)⁻¹ and the solution.
	for c := 0; c < p; c++ {
		piv := c
		for r := c + 1; r < p; r++ {
			if math.Abs(a[r][c]) > math.Abs(a[piv][c]) {
				piv = r
			}
		}
		if math.Abs(a[piv][c]) < 1e-300 {
			return nil, nil, ErrNoSpread
		}
		a[c], a[piv] = a[piv], a[c]
		f := a[c][c]
		for j := range a[c] {
			a[c][j] /= f
		}
		for r := 0; r < p; r++ {
			if r != c && a[r][c] != 0 {
				g := a[r][c]
				for j := range a[r] {
					a[r][j] -= g * a[c][j]
				}
			}
		}
	}
	coef = make([]float64, p)
	for i := range coef {
		coef[i] = a[i][2*p]
	}
	var ssr float64
	for k := 0; k < n; k++ {
		r := y[k]
		for j := 0; j < p; j++ {
			r -= coef[j] * cols[j][k]
		}
		ssr += r * r
	}
	s2 := ssr / float64(n-p)
	se = make([]float64, p)
	for i := range se {
		se[i] = math.Sqrt(s2 * a[i][p+i])
	}
	return coef, se, nil
}
