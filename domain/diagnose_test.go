package domain_test

import (
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	. "example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"
)

var simT0 = time.Date(2026, 3, 5, 13, 30, 0, 0, time.UTC)

// codesOf flattens the ranked diagnoses: each code followed by its
// alternatives.
func codesOf(a Assessment) []string {
	var out []string
	for _, d := range a.Diagnoses {
		out = append(out, d.Code)
		out = append(out, d.Alternatives...)
	}
	return out
}

// topOK reports whether want is the top diagnosis or tied with it (one of
// its alternatives: a documented look-alike or a score within 0.1).
func topOK(a Assessment, want string) bool {
	if len(a.Diagnoses) == 0 {
		return false
	}
	d := a.Diagnoses[0]
	if d.Code == want {
		return true
	}
	for _, alt := range d.Alternatives {
		if alt == want {
			return true
		}
	}
	return false
}

func simulate(t testing.TB, exp, mistake string, seed uint64) sim.Group {
	t.Helper()
	g, err := sim.Simulate(exp, mistake, rand.New(rand.NewPCG(seed, 7)), simT0)
	if err != nil {
		t.Fatal(err)
	}
	return g
}

// TestGoldenDiagnoses injects each simulated mistake, one at a time, and
// requires its code to be top-ranked or tied with the top one.
func TestGoldenDiagnoses(t *testing.T) {
	for _, exp := range sim.Experiments() {
		for _, code := range sim.Mistakes(exp) {
			t.Run(exp+"/"+code, func(t *testing.T) {
				_, a := assessSim(t, exp, code, 1)
				if !topOK(a, code) {
					t.Errorf("verdict %s, diagnoses %v; want %s on top (%s)", a.Verdict.Label(), codesOf(a), code, a.Reason)
				}
			})
		}
	}
}

// TestCleanGroupsAreConsistent is the property test: clean simulated groups
// at realistic noise, whole runs and the first five and six readings of
// them (the short runs where fixed thresholds used to flag clean data), are
// "check" at most 1 % of the time and never "off". It prints the rates per
// experiment:
//
//	go test -run TestCleanGroupsAreConsistent -v ./domain/
func TestCleanGroupsAreConsistent(t *testing.T) {
	const runs = 300
	for _, exp := range sim.Experiments() {
		e, _ := LookupExperiment(exp)
		var judged, check, off int
		var bad []string
		for seed := uint64(0); seed < runs; seed++ {
			g := simulate(t, exp, "", 1000+seed)
			for _, n := range []int{5, 6, len(g.Readings)} {
				if n < e.MinReadings || n > len(g.Readings) {
					continue
				}
				a := Assess(g.Bench, g.Readings[:n], DefaultTolerance())
				judged++
				switch a.Verdict {
				case Consistent:
					continue
				case Check:
					check++
				case Off:
					off++
				}
				if len(bad) < 3 {
					bad = append(bad, fmt.Sprintf("seed %d, %d readings: %s %v %s", seed, n, a.Verdict.Label(), codesOf(a), a.Reason))
				}
			}
		}
		checkRate := float64(check) / float64(judged)
		t.Logf("%s: %d clean runs judged, check %.2f %%, off %d", exp, judged, 100*checkRate, off)
		if checkRate > 0.01 || off > 0 {
			t.Errorf("%s: check %.2f %% (want ≤ 1 %%), off %d (want 0); e.g. %v", exp, 100*checkRate, off, bad)
		}
	}
}

// TestCatalogueAccuracy prints top-1 and top-3 diagnosis accuracy over the
// simulated catalogue and the false-alarm rate on clean groups:
//
//	go test -run TestCatalogueAccuracy -v ./domain/
func TestCatalogueAccuracy(t *testing.T) {
	const runs = 40
	var top1, top3, total, clean, falseAlarm int
	for _, exp := range sim.Experiments() {
		for _, code := range sim.Mistakes(exp) {
			var t1, t3 int
			for seed := uint64(0); seed < runs; seed++ {
				g := simulate(t, exp, code, 5000+seed)
				a := Assess(g.Bench, g.Readings, DefaultTolerance())
				cs := codesOf(a)
				if topOK(a, code) {
					t1++
				}
				for i := 0; i < len(cs) && i < 3; i++ {
					if cs[i] == code {
						t3++
						break
					}
				}
			}
			t.Logf("%-40s top-1 %3d %%  top-3 %3d %%", code+" ("+exp+")", 100*t1/runs, 100*t3/runs)
			top1, top3, total = top1+t1, top3+t3, total+runs
		}
		for seed := uint64(0); seed < runs; seed++ {
			g := simulate(t, exp, "", 9000+seed)
			a := Assess(g.Bench, g.Readings, DefaultTolerance())
			clean++
			if a.Verdict != Consistent || len(a.Diagnoses) > 0 && a.Diagnoses[0].Code != CodeTooGood {
				falseAlarm++
			}
		}
	}
	t.Logf("catalogue: top-1 %.1f %%, top-3 %.1f %% over %d simulated groups; false alarms %.1f %% of %d clean groups",
		100*float64(top1)/float64(total), 100*float64(top3)/float64(total), total, 100*float64(falseAlarm)/float64(clean), clean)
	if float64(top1)/float64(total) < 0.95 {
		t.Errorf("top-1 accuracy %.1f %% is below 95 %%", 100*float64(top1)/float64(total))
	}
	if float64(top3)/float64(total) < 0.99 {
		t.Errorf("top-3 accuracy %.1f %% is below 99 %%", 100*float64(top3)/float64(total))
	}
	if float64(falseAlarm)/float64(clean) > 0.01 {
		t.Errorf("false alarms on %.1f %% of clean groups, above 1 %%", 100*float64(falseAlarm)/float64(clean))
	}
}
