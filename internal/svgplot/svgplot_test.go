package svgplot

import (
	"regexp"
	"strings"
	"testing"

	"example.com/fluxroom/domain"
)

// TestNiceTicks: round tick values around the data, labels without float
// noise or "-0", one number of decimals along an axis.
func TestNiceTicks(t *testing.T) {
	for _, tc := range []struct {
		lo, hi float64
		want   string
	}{
		{-4.78, 14.4, "-5 0 5 10 15"},
		{0, 5, "0 1 2 3 4 5"},
		{0.1, 0.7, "0 0.2 0.4 0.6 0.8"},
		// One number of decimals along an axis, from its step.
		{-0.0004, 0.0021, "-0.0005 0 0.0005 0.0010 0.0015 0.0020 0.0025"},
		{122.3, 123.1, "122.2 122.4 122.6 122.8 123.0 123.2"},
	} {
		tk := niceTicks(tc.lo, tc.hi)
		var got []string
		for _, v := range tk.values {
			got = append(got, tk.label(v))
		}
		if strings.Join(got, " ") != tc.want {
			t.Errorf("niceTicks(%g, %g) = %q, want %q", tc.lo, tc.hi, strings.Join(got, " "), tc.want)
		}
		if tk.values[0] > tc.lo || tk.values[len(tk.values)-1] < tc.hi {
			t.Errorf("niceTicks(%g, %g) = %v does not cover the data", tc.lo, tc.hi, tk.values)
		}
	}
}

// TestBenchPlotLabelsAndLegend: the axes carry round labels only, and the
// legend names what is drawn.
func TestBenchPlotLabelsAndLegend(t *testing.T) {
	p := &domain.Plot{XLabel: "current I (A)", YLabel: "force F (N)",
		Points: []domain.PlotPoint{{X: 0, Y: 0.0011, UY: 0.003}, {X: 1, Y: 0.4811, UY: 0.003}, {X: 2, Y: 0.9602, UY: 0.003}},
		Fit:    []domain.XY{{X: 0, Y: 0.001}, {X: 2, Y: 0.961}}, Theory: []domain.XY{{X: 0, Y: 0}, {X: 2, Y: 0.96}},
		BandLow: []domain.XY{{X: 0, Y: 0}, {X: 2, Y: 0.912}}, BandHigh: []domain.XY{{X: 0, Y: 0}, {X: 2, Y: 1.008}}}
	svg := Bench(p)
	for _, m := range regexp.MustCompile(`<text class="tick"[^>]*>([^<]*)</text>`).FindAllStringSubmatch(svg, -1) {
		label := m[1]
		if label == "-0" || len(strings.TrimLeft(label, "-")) > 6 && !strings.ContainsAny(label, "abcdefghijklmnopqrstuvwxyz") {
			t.Errorf("tick label %q is not a round value", label)
		}
	}
	for _, item := range []string{"readings", "fit", "theory", "tolerance band"} {
		if !strings.Contains(svg, ">"+item+"</text>") {
			t.Errorf("legend has no %q", item)
		}
	}
	bare := Bench(&domain.Plot{Points: p.Points})
	if strings.Contains(bare, ">theory</text>") || !strings.Contains(bare, ">readings</text>") {
		t.Errorf("a plot of readings alone lists more in its legend than it draws")
	}
}
