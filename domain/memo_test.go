package domain_test

import (
	"fmt"
	"maps"
	"math/rand/v2"
	"reflect"
	"testing"
	"time"

	. "example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"

	"github.com/google/go-cmp/cmp"
)

// Judging a bench reading by reading with a Memo gives exactly what judging
// it from scratch gives, for every experiment and simulated mistake,
// through a correction and a change of the bench's experiment.
func TestMemoMatchesFromScratch(t *testing.T) {
	t0 := time.Date(2026, 10, 6, 13, 0, 0, 0, time.UTC)
	constantsChanged := 0
	defer func() {
		if constantsChanged == 0 {
			t.Error("no simulated group had a bench constant that changes its assessment: the constants step checked nothing")
		}
	}()
	for _, exp := range sim.Experiments() {
		for _, mistake := range append([]string{""}, sim.Mistakes(exp)...) {
			g, err := sim.Simulate(exp, mistake, rand.New(rand.NewPCG(3, 4)), t0)
			if err != nil {
				t.Fatal(err)
			}
			var m Memo
			var rs []Reading
			check := func(step string) {
				t.Helper()
				want := Assess(g.Bench, rs, DefaultTolerance())
				got := AssessMemo(g.Bench, rs, DefaultTolerance(), &m)
				// The room's judging leaves out the plot; everything
				// else is the same.
				if got.Plot != nil {
					t.Fatalf("%s/%s %s: AssessMemo drew a plot", exp, mistake, step)
				}
				if want.Fit != nil && want.Plot == nil {
					t.Fatalf("%s/%s %s: Assess fitted a line and drew no plot", exp, mistake, step)
				}
				want.Plot = nil
				if !reflect.DeepEqual(got, want) {
					t.Fatalf("%s/%s %s: with the memo (-) and from scratch (+):\n%s", exp, mistake, step, cmp.Diff(got, want, cmp.AllowUnexported(Plot{})))
				}
				if w, g2 := ResultOf(g.Bench, want, rs), ResultOfMemo(g.Bench, got, rs, &m); w != g2 {
					t.Fatalf("%s/%s %s: result with the memo %+v, from scratch %+v", exp, mistake, step, g2, w)
				}
			}
			for i, r := range g.Readings {
				rs = append(rs, r)
				check(fmt.Sprintf("after reading %d", i+1))
			}
			if len(rs) > 0 {
				fix := rs[0]
				fix.ID, fix.Supersedes = "fix", rs[0].ID
				rs = append(rs, fix)
				check("after a correction")
			}
			if len(rs) > 2 {
				// A reading committed before others but judged after them
				// lands among them: the memo must not pair later readings
				// with the conversions of their old places.
				late := rs[len(rs)/2]
				late.ID = "late"
				late.Values = ValuesOf(map[string]Quantity{})
				for _, nq := range rs[len(rs)-1].Values {
					late.Values.Set(nq.Name, nq.Quantity)
				}
				rs = append(rs[:1], append([]Reading{late}, rs[1:]...)...)
				check("after a reading placed among earlier ones")
			}
			// The instructor corrects a bench constant, one that changes
			// the verdict's figures: the memo must convert the new
			// constants, not keep the old ones.
			e, _ := LookupExperiment(exp)
			for _, spec := range e.Constants {
				fixed := maps.Clone(g.Bench.Constants)
				was, ok := fixed[spec.Name]
				if !ok {
					was = Quantity{Value: spec.Default, Unit: spec.Unit}
				}
				fixed[spec.Name] = Quantity{Value: was.Value * 0.8, Unit: was.Unit, Uncertainty: was.Uncertainty}
				other := g.Bench
				other.Constants = fixed
				if reflect.DeepEqual(Assess(other, rs, DefaultTolerance()), Assess(g.Bench, rs, DefaultTolerance())) {
					continue
				}
				AssessMemo(g.Bench, rs, DefaultTolerance(), &m)
				g.Bench = other
				check("after bench constant " + spec.Name + " changed")
				constantsChanged++
				break
			}
			// Judged against another experiment's rules, the same memo
			// must start over, not reuse conversions made for this one.
			other := g.Bench
			other.Experiment = "coil_force"
			if exp == "coil_force" {
				other.Experiment = "solenoid"
			}
			want := Assess(other, rs, DefaultTolerance())
			want.Plot = nil
			if got := AssessMemo(other, rs, DefaultTolerance(), &m); !reflect.DeepEqual(got, want) {
				t.Fatalf("%s/%s judged as %s: the memo kept the old experiment's work", exp, mistake, other.Experiment)
			}
		}
	}
}
