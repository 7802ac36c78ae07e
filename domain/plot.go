package domain

import (
	"math"
)

// Plot is what the bench detail draws: the readings with error bars, the
// fitted line, the theory line and the course's tolerance band, in SI.
type Plot struct {
	XLabel, YLabel string
	Points         []PlotPoint
	// Theory, Fit, BandLow and BandHigh are polylines.
	Theory, Fit, BandLow, BandHigh []XY
}

// PlotPoint is one reading on the plot.
type PlotPoint struct {
	X, Y, UY  float64
	ReadingID string
}

// XY is one vertex of a line.
type XY struct{ X, Y float64 }

// span returns the range of xs, widened to include zero.
func span(xs []float64) (lo, hi float64) {
	lo, hi = 0, 0
	for _, x := range xs {
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	return lo, hi
}

// linePlot builds a plot of y against x with a fitted line a + b·x, a theory
// line through the origin with slope pred, and a band of ±pct % about it.
func linePlot(xl, yl string, pts []PlotPoint, a, b, pred, pct float64) Plot {
	xs := make([]float64, len(pts))
	for i, p := range pts {
		xs[i] = p.X
	}
	lo, hi := span(xs)
	line := func(f func(x float64) float64) []XY { return []XY{{lo, f(lo)}, {hi, f(hi)}} }
	return Plot{XLabel: xl, YLabel: yl, Points: pts,
		Fit:      line(func(x float64) float64 { return a + b*x }),
		Theory:   line(func(x float64) float64 { return pred * x }),
		BandLow:  line(func(x float64) float64 { return pred * x * (1 - pct/100) }),
		BandHigh: line(func(x float64) float64 { return pred * x * (1 + pct/100) }),
	}
}
