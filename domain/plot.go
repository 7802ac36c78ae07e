package domain

import (
	"math"
	"strings"
)

// Plot is what the bench detail draws: the readings with error bars, the
// fitted line, the theory line and the course's tolerance band. The judging
// makes it in SI; Assess then shows each axis in the unit the group typed
// that axis' value in (XValue, YValue name the values).
type Plot struct {
	XLabel, YLabel string
	XValue, YValue string
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

// inTypedUnits shows each axis of the plot in the unit the group typed its
// value in (the last counted reading's), instead of SI: a field read in mT
// is plotted in mT, a diameter typed in cm as a radius in cm.
func (p *Plot) inTypedUnits(readings []Reading) {
	typed := func(name string) (string, float64, bool) {
		for i := len(readings) - 1; i >= 0 && name != ""; i-- {
			if q, ok := readings[i].Values.Get(name); ok {
				u, ok := units[normalizeUnit(q.Unit)]
				if ok && u.factor != 1 && u.factor > 0 {
					return normalizeUnit(q.Unit), u.factor, true
				}
				return "", 0, false
			}
		}
		return "", 0, false
	}
	if unit, f, ok := typed(p.XValue); ok {
		for i := range p.Points {
			p.Points[i].X /= f
		}
		for _, l := range [][]XY{p.Theory, p.Fit, p.BandLow, p.BandHigh} {
			for i := range l {
				l[i].X /= f
			}
		}
		p.XLabel = relabel(p.XLabel, unit)
	}
	if unit, f, ok := typed(p.YValue); ok {
		for i := range p.Points {
			p.Points[i].Y /= f
			p.Points[i].UY /= f
		}
		for _, l := range [][]XY{p.Theory, p.Fit, p.BandLow, p.BandHigh} {
			for i := range l {
				l[i].Y /= f
			}
		}
		p.YLabel = relabel(p.YLabel, unit)
	}
}

// relabel puts unit in place of an axis label's "(SI unit)".
func relabel(label, unit string) string {
	if i := strings.LastIndex(label, " ("); i >= 0 {
		label = label[:i]
	}
	return label + " (" + displayUnit(unit) + ")"
}
