package domain

import (
	"fmt"
	"math"
	"slices"
)

// lineShape runs the shape checks every straight-line fit gets: one point
// with a slipped decimal, residuals that trend with time, and scatter too
// small for the instruments. uy is the standard uncertainty of one y value
// that the instruments' resolution allows; names say what x and y are.
func lineShape(fs *findings, x, y []float64, f Fit, uy float64, yName, yUnit string) {
	n := len(x)
	if n >= 4 {
		slip := outlierSlip(x, y, f, uy)
		if slip >= 0 {
			fs.add(CodeDecimalSlipPoint, fmt.Sprintf("reading %d: %s %.4g %s, while the other readings put it near %.4g", slip+1, yName, y[slip], yUnit,
				predictWithout(x, y, slip)), 0.9, true)
		}
	}
	if n >= 6 {
		res := make([]float64, n)
		order := make([]float64, n)
		for i := range x {
			res[i] = y[i] - (f.Intercept + f.Slope*x[i])
			order[i] = float64(i)
		}
		if t := TrendT(order, res); math.Abs(t) > 4 && f.ResidualSD > 2*uy {
			fs.add(CodeDrift, fmt.Sprintf("residuals trend with reading order (t = %+.1f)", t), 0.7, true)
		}
		if uy > 0 && f.ResidualSD < 0.3*uy {
			fs.add(CodeTooGood, fmt.Sprintf("residual scatter %.2g %s with %d readings, below the %.2g %s the resolution alone gives",
				f.ResidualSD, yUnit, n, uy, yUnit), 0.55, false)
		}
	}
}

func predictWithout(x, y []float64, i int) float64 {
	xs := append(append([]float64(nil), x[:i]...), x[i+1:]...)
	ys := append(append([]float64(nil), y[:i]...), y[i+1:]...)
	g, err := FitLine(xs, ys)
	if err != nil {
		return math.NaN()
	}
	return g.Intercept + g.Slope*x[i]
}

// median returns the median of v (v is not changed).
func median(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), v...)
	sortFloats(s)
	m := len(s) / 2
	if len(s)%2 == 1 {
		return s[m]
	}
	return (s[m-1] + s[m]) / 2
}

// mad is the median absolute deviation scaled to a standard deviation for
// normal data (×1.4826) // common practice in robust statistics.
func mad(v []float64) float64 {
	m := median(v)
	d := make([]float64, len(v))
	for i, x := range v {
		d[i] = math.Abs(x - m)
	}
	return 1.4826 * median(d)
}

func sortFloats(s []float64) { slices.Sort(s) }
