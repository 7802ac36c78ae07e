// Package svgplot draws fluxroom's plots as SVG text: a bench's readings
// with error bars, fit, theory and tolerance band, and a room's results as
// dots against theory. The dashboard and the printable report share it.
package svgplot

import (
	"fmt"
	"html"
	"math"
	"strconv"
	"strings"

	"example.com/fluxroom/domain"
)

// Plot geometry, in SVG user units.
const (
	plotW, plotH           = 560.0, 320.0
	plotLeft, plotRight    = 70.0, 16.0
	plotTop, plotBottom    = 14.0, 46.0
	plotInnerW, plotInnerH = plotW - plotLeft - plotRight, plotH - plotTop - plotBottom
	dotW, dotH, dotPad     = 420.0, 44.0, 16.0
	dotLo, dotHi           = 0.0, 2.0
	dotInnerW              = dotW - 2*dotPad
	tickCount              = 5
	minPlotSpan            = 1e-30
)

// Bench draws a bench's plot: the tolerance band, the theory line, the
// fitted line and every reading with its error bar. It is a pure function
// of the plot so that tests can count what it draws.
func Bench(p *domain.Plot) string {
	if p == nil || len(p.Points) == 0 {
		return `<p class="plot-empty">No readings to plot yet.</p>`
	}
	xlo, xhi, ylo, yhi := math.Inf(1), math.Inf(-1), math.Inf(1), math.Inf(-1)
	grow := func(x, y float64) {
		xlo, xhi = math.Min(xlo, x), math.Max(xhi, x)
		ylo, yhi = math.Min(ylo, y), math.Max(yhi, y)
	}
	for _, pt := range p.Points {
		grow(pt.X, pt.Y-pt.UY)
		grow(pt.X, pt.Y+pt.UY)
	}
	for _, l := range [][]domain.XY{p.Theory, p.Fit, p.BandLow, p.BandHigh} {
		for _, v := range l {
			grow(v.X, v.Y)
		}
	}
	if xhi-xlo < minPlotSpan {
		xhi = xlo + 1
	}
	if yhi-ylo < minPlotSpan {
		yhi = ylo + 1
	}
	// Round axes: each runs from one round tick to another, with room at
	// the top for the legend.
	yhi += 0.12 * (yhi - ylo)
	xt, yt := niceTicks(xlo, xhi), niceTicks(ylo, yhi)
	xlo, xhi = xt.values[0], xt.values[len(xt.values)-1]
	ylo, yhi = yt.values[0], yt.values[len(yt.values)-1]
	sx := func(x float64) float64 { return plotLeft + (x-xlo)/(xhi-xlo)*plotInnerW }
	sy := func(y float64) float64 { return plotTop + (yhi-y)/(yhi-ylo)*plotInnerH }
	var b strings.Builder
	fmt.Fprintf(&b, `<svg class="plot" viewBox="0 0 %g %g" role="img" aria-label="%s against %s">`, plotW, plotH,
		html.EscapeString(p.YLabel), html.EscapeString(p.XLabel))
	// Axes and ticks.
	fmt.Fprintf(&b, `<line class="axis" x1="%.1f" y1="%.1f" x2="%.1f" y2="%.1f"/>`, plotLeft, plotTop+plotInnerH, plotLeft+plotInnerW, plotTop+plotInnerH)
	fmt.Fprintf(&b, `<line class="axis" x1="%.1f" y1="%.1f" x2="%.1f" y2="%.1f"/>`, plotLeft, plotTop, plotLeft, plotTop+plotInnerH)
	for _, x := range xt.values {
		fmt.Fprintf(&b, `<text class="tick" x="%.1f" y="%.1f" text-anchor="middle">%s</text>`, sx(x), plotTop+plotInnerH+16, xt.label(x))
	}
	for _, y := range yt.values {
		fmt.Fprintf(&b, `<text class="tick" x="%.1f" y="%.1f" text-anchor="end">%s</text>`, plotLeft-6, sy(y)+4, yt.label(y))
	}
	fmt.Fprintf(&b, `<text class="axis-label" x="%.1f" y="%.1f" text-anchor="middle">%s</text>`, plotLeft+plotInnerW/2, plotH-6, html.EscapeString(p.XLabel))
	fmt.Fprintf(&b, `<text class="axis-label" x="14" y="%.1f" transform="rotate(-90 14 %.1f)" text-anchor="middle">%s</text>`,
		plotTop+plotInnerH/2, plotTop+plotInnerH/2, html.EscapeString(p.YLabel))
	// Tolerance band between its two edges.
	if len(p.BandLow) >= 2 && len(p.BandHigh) >= 2 {
		var pts []string
		for _, v := range p.BandLow {
			pts = append(pts, fmt.Sprintf("%.1f,%.1f", sx(v.X), sy(v.Y)))
		}
		for i := len(p.BandHigh) - 1; i >= 0; i-- {
			v := p.BandHigh[i]
			pts = append(pts, fmt.Sprintf("%.1f,%.1f", sx(v.X), sy(v.Y)))
		}
		fmt.Fprintf(&b, `<polygon class="band" points="%s"/>`, strings.Join(pts, " "))
	}
	polyline := func(class string, l []domain.XY) {
		if len(l) < 2 {
			return
		}
		var pts []string
		for _, v := range l {
			pts = append(pts, fmt.Sprintf("%.1f,%.1f", sx(v.X), sy(v.Y)))
		}
		fmt.Fprintf(&b, `<polyline class="%s" points="%s"/>`, class, strings.Join(pts, " "))
	}
	polyline("theory", p.Theory)
	polyline("fit", p.Fit)
	for _, pt := range p.Points {
		x := sx(pt.X)
		fmt.Fprintf(&b, `<line class="eb" x1="%.1f" y1="%.1f" x2="%.1f" y2="%.1f"/>`, x, sy(pt.Y-pt.UY), x, sy(pt.Y+pt.UY))
		fmt.Fprintf(&b, `<circle class="pt" data-reading="%s" cx="%.1f" cy="%.1f" r="4"><title>%s: %s, %s</title></circle>`,
			html.EscapeString(pt.ReadingID), x, sy(pt.Y), html.EscapeString(pt.ReadingID), tick(pt.X), tick(pt.Y))
	}
	legend(&b, p)
	b.WriteString(`</svg>`)
	return b.String()
}

// legend names what the plot draws, top left inside the axes: only the
// parts this plot has.
func legend(b *strings.Builder, p *domain.Plot) {
	type item struct{ class, sample, text string }
	items := []item{{"pt", `<circle class="legend-pt" cx="8" cy="0" r="4"/>`, "readings"}}
	if len(p.Fit) >= 2 {
		items = append(items, item{"fit", `<line class="fit" x1="0" y1="0" x2="16" y2="0"/>`, "fit"})
	}
	if len(p.Theory) >= 2 {
		items = append(items, item{"theory", `<line class="theory" x1="0" y1="0" x2="16" y2="0"/>`, "theory"})
	}
	if len(p.BandLow) >= 2 {
		items = append(items, item{"band", `<rect class="band" x="0" y="-5" width="16" height="10"/>`, "tolerance band"})
	}
	x := plotLeft + 10
	b.WriteString(`<g class="legend">`)
	for _, it := range items {
		fmt.Fprintf(b, `<g class="legend-item" data-item="%s" transform="translate(%.1f %.1f)">%s<text class="tick" x="20" y="4">%s</text></g>`,
			it.class, x, plotTop+10, it.sample, it.text)
		x += 28 + 7*float64(len(it.text))
	}
	b.WriteString(`</g>`)
}

// ticks are an axis's round values, from the first below its data to the
// first above, and how many decimals their labels need.
type ticks struct {
	values   []float64
	decimals int
}

// niceTicks chooses round tick values for [lo, hi]: a step of 1, 2 or 5
// times a power of ten giving about tickCount intervals, the "nice numbers"
// of [pub: P. S. Heckbert, Graphics Gems (1990), "Nice numbers for graph
// labels"].
func niceTicks(lo, hi float64) ticks {
	raw := (hi - lo) / tickCount
	p := math.Pow(10, math.Floor(math.Log10(raw)))
	step := 10 * p
	for _, m := range []float64{1, 2, 5} {
		if m*p >= raw*(1-1e-9) {
			step = m * p
			break
		}
	}
	first, last := math.Floor(lo/step+1e-9), math.Ceil(hi/step-1e-9)
	t := ticks{decimals: max(0, -int(math.Floor(math.Log10(step)+1e-9)))}
	for k := first; k <= last; k++ {
		t.values = append(t.values, k*step)
	}
	return t
}

// label writes a tick value with the axis's decimals: no float noise
// (0.30000000000000004 is 0.3) and no "-0".
func (t ticks) label(v float64) string {
	s := strconv.FormatFloat(v, 'f', t.decimals, 64)
	if strings.Trim(s, "-0.") == "" {
		return "0"
	}
	return s
}

// tick formats a value with three significant figures.
func tick(v float64) string {
	if v == 0 {
		return "0"
	}
	return strings.TrimSuffix(fmt.Sprintf("%.3g", v), ".0")
}

// Dot is one group's result on the room's dot plot.
type Dot struct {
	Label   string
	Ratio   float64
	Verdict string // css class of the verdict
}

// Dots draws every group's measured/predicted ratio on a line from 0
// to 2, labelled ×0 to ×2, with the theory value (×1) marked; ratios
// outside are pinned to the ends.
func Dots(dots []Dot) string {
	sx := func(r float64) float64 {
		r = math.Max(dotLo, math.Min(dotHi, r))
		return dotPad + (r-dotLo)/(dotHi-dotLo)*dotInnerW
	}
	var b strings.Builder
	fmt.Fprintf(&b, `<svg class="dots" viewBox="0 0 %g %g" role="img" aria-label="results as a ratio to theory">`, dotW, dotH)
	fmt.Fprintf(&b, `<line class="axis" x1="%g" y1="22" x2="%g" y2="22"/>`, dotPad, dotW-dotPad)
	fmt.Fprintf(&b, `<line class="theory" x1="%.1f" y1="8" x2="%.1f" y2="36"/>`, sx(1), sx(1))
	for _, r := range []float64{0, 0.5, 1.5, 2} {
		fmt.Fprintf(&b, `<text class="tick" x="%.1f" y="42" text-anchor="middle">×%g</text>`, sx(r), r)
	}
	fmt.Fprintf(&b, `<text class="tick" x="%.1f" y="42" text-anchor="middle">×1 theory</text>`, sx(1))
	for i, d := range dots {
		y := 16.0 + float64(i%3)*6
		fmt.Fprintf(&b, `<circle class="dot v-%s" cx="%.1f" cy="%.1f" r="4"><title>%s: ×%.3g</title></circle>`,
			d.Verdict, sx(d.Ratio), y, html.EscapeString(d.Label), d.Ratio)
	}
	b.WriteString(`</svg>`)
	return b.String()
}
