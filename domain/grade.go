package domain

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"
)

// Policy is a course's grading rule, loaded from a JSON file documented in
// README.md ("Grading policy"). Every field has a default (DefaultPolicy).
type Policy struct {
	Name string `json:"name"`
	// Points is the most each part can earn.
	Points PolicyPoints `json:"points"`
	// RequiredReadings is how many readings count as a complete run, per
	// experiment id.
	RequiredReadings map[string]int `json:"required_readings"`
	Accuracy         AccuracyRule   `json:"accuracy"`
	Precision        PrecisionRule  `json:"precision"`
	Quality          QualityRule    `json:"data_quality"`
	// UnsafeDeduction is taken off per reading that broke a safety limit.
	UnsafeDeduction float64 `json:"unsafe_deduction"`
}

// PolicyPoints are the maximum points of each part of a grade.
type PolicyPoints struct {
	Completeness float64 `json:"completeness"`
	Accuracy     float64 `json:"accuracy"`
	Precision    float64 `json:"precision"`
	Quality      float64 `json:"data_quality"`
}

// AccuracyRule: full points when |z| ≤ FullWithinZ or within FullPercent of
// theory; half at HalfPercent; none from ZeroPercent; linear in between.
type AccuracyRule struct {
	FullWithinZ float64 `json:"full_within_z"`
	FullPercent float64 `json:"full_within_percent"`
	HalfPercent float64 `json:"half_at_percent"`
	ZeroPercent float64 `json:"zero_from_percent"`
}

// PrecisionRule: full points when the result's relative uncertainty is at
// most FullPercent, none from ZeroPercent, linear in between.
type PrecisionRule struct {
	FullPercent float64 `json:"full_at_or_below_percent"`
	ZeroPercent float64 `json:"zero_from_percent"`
}

// QualityRule: data quality starts full and loses DeductPerDiagnosis of its
// points for each diagnosed problem with the data.
type QualityRule struct {
	DeductPerDiagnosis float64 `json:"deduct_fraction_per_diagnosis"`
}

// DefaultPolicy returns ten points per experiment: 2 completeness, 4
// accuracy, 2 precision, 2 data quality, one point off per unsafe reading;
// a new copy each call, so no caller can change another's. The bands
// follow the 5 % / 10 % practice of introductory labs // common practice.
func DefaultPolicy() Policy {
	return Policy{
		Name:   "fluxroom default",
		Points: PolicyPoints{Completeness: 2, Accuracy: 4, Precision: 2, Quality: 2},
		RequiredReadings: map[string]int{
			"coil_force": 8, "e_over_m": 6, "straight_wire": 6, "solenoid": 5, "flat_coil": 5,
		},
		Accuracy:        AccuracyRule{FullWithinZ: 2, FullPercent: 5, HalfPercent: 10, ZeroPercent: 20},
		Precision:       PrecisionRule{FullPercent: 5, ZeroPercent: 15},
		Quality:         QualityRule{DeductPerDiagnosis: 0.5},
		UnsafeDeduction: 1,
	}
}

// ValidatePolicy checks a policy and names every bad field by its JSON path.
func ValidatePolicy(p Policy) error {
	var vs violations
	nonNeg := func(field string, v, max float64) {
		if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 || v > max {
			vs.add(field, "must be a number from 0 to %g, got %v", max, v)
		}
	}
	nonNeg("points.completeness", p.Points.Completeness, 1000)
	nonNeg("points.accuracy", p.Points.Accuracy, 1000)
	nonNeg("points.precision", p.Points.Precision, 1000)
	nonNeg("points.data_quality", p.Points.Quality, 1000)
	if p.Points == (PolicyPoints{}) {
		vs.add("points", "gives no points at all")
	}
	for _, id := range sortedKeys(p.RequiredReadings) {
		if _, ok := LookupExperiment(id); !ok {
			vs.add(fmt.Sprintf("required_readings[%q]", id), "unknown experiment; use one of %s", strings.Join(ExperimentIDs(), ", "))
		} else if n := p.RequiredReadings[id]; n < 1 || n > 1000 {
			vs.add(fmt.Sprintf("required_readings[%q]", id), "must be 1–1000, got %d", n)
		}
	}
	a := p.Accuracy
	nonNeg("accuracy.full_within_z", a.FullWithinZ, 10)
	nonNeg("accuracy.full_within_percent", a.FullPercent, 100)
	nonNeg("accuracy.half_at_percent", a.HalfPercent, 100)
	nonNeg("accuracy.zero_from_percent", a.ZeroPercent, 1000)
	if !(a.FullPercent < a.HalfPercent && a.HalfPercent < a.ZeroPercent) {
		vs.add("accuracy", "needs full_within_percent < half_at_percent < zero_from_percent, got %g, %g, %g", a.FullPercent, a.HalfPercent, a.ZeroPercent)
	}
	nonNeg("precision.full_at_or_below_percent", p.Precision.FullPercent, 100)
	nonNeg("precision.zero_from_percent", p.Precision.ZeroPercent, 1000)
	if !(p.Precision.FullPercent < p.Precision.ZeroPercent) {
		vs.add("precision", "needs full_at_or_below_percent < zero_from_percent, got %g, %g", p.Precision.FullPercent, p.Precision.ZeroPercent)
	}
	nonNeg("data_quality.deduct_fraction_per_diagnosis", p.Quality.DeductPerDiagnosis, 1)
	nonNeg("unsafe_deduction", p.UnsafeDeduction, 1000)
	return vs.err()
}

// Max is the most a group can earn under the policy.
func (p Policy) Max() float64 {
	return p.Points.Completeness + p.Points.Accuracy + p.Points.Precision + p.Points.Quality
}

// Grade is one group's points on one experiment.
type Grade struct {
	Completeness, Accuracy, Precision, Quality float64
	Deductions                                 float64
	// Computed is the sum of the parts less deductions, at least 0; Max the
	// most possible.
	Computed, Max float64
	// Final is Computed, or the latest override's points.
	Final    float64
	Override *Override
	// Feedback is plain words for the group.
	Feedback []string
}

// Override is an instructor's change of a grade, kept in the audit log.
type Override struct {
	BenchID  uint64
	Points   float64
	Reason   string
	Author   string
	At       time.Time
	Previous float64
}

// ValidateOverride checks an override against the policy's maximum.
func ValidateOverride(o Override, max float64) error {
	var vs violations
	if math.IsNaN(o.Points) || o.Points < 0 || o.Points > max {
		vs.add("points", "must be from 0 to %g, got %v", max, o.Points)
	}
	if r := strings.TrimSpace(o.Reason); r == "" || len(r) > 1000 {
		vs.add("reason", "must say why, in 1–1000 characters")
	}
	return vs.err()
}

// ramp is 1 at or below full, 0 at or above zero, linear between.
func ramp(x, full, zero float64) float64 {
	switch {
	case x <= full:
		return 1
	case x >= zero:
		return 0
	}
	return (zero - x) / (zero - full)
}

// GradeOf grades an assessment under a policy. counted is the number of
// readings that count (corrections excluded); unsafe the readings that broke
// a safety limit; overrides the bench's overrides in time order.
func GradeOf(experiment string, a Assessment, unsafe int, overrides []Override, p Policy) Grade {
	g := Grade{Max: p.Max()}
	need := p.RequiredReadings[experiment]
	if need == 0 {
		need = 1
	}
	g.Completeness = p.Points.Completeness * math.Min(1, float64(a.ReadingCount)/float64(need))
	hasResult := a.ResultUnit != "" && a.Verdict != NeedData
	if hasResult {
		pct := math.Abs(a.PercentDiff)
		acc := 0.0
		switch {
		case math.Abs(a.Z) <= p.Accuracy.FullWithinZ || pct <= p.Accuracy.FullPercent:
			acc = 1
		case pct <= p.Accuracy.HalfPercent:
			acc = 1 - 0.5*(pct-p.Accuracy.FullPercent)/(p.Accuracy.HalfPercent-p.Accuracy.FullPercent)
		default:
			acc = 0.5 * ramp(pct, p.Accuracy.HalfPercent, p.Accuracy.ZeroPercent)
		}
		g.Accuracy = p.Points.Accuracy * acc
		g.Precision = p.Points.Precision * ramp(100*a.Measured.RelUncertainty(), p.Precision.FullPercent, p.Precision.ZeroPercent)
		g.Quality = p.Points.Quality * math.Max(0, 1-p.Quality.DeductPerDiagnosis*float64(len(a.Diagnoses)))
	}
	g.Deductions = p.UnsafeDeduction * float64(unsafe)
	g.Computed = math.Max(0, g.Completeness+g.Accuracy+g.Precision+g.Quality-g.Deductions)
	g.Computed = math.Round(g.Computed*100) / 100
	g.Final = g.Computed
	if n := len(overrides); n > 0 {
		o := overrides[n-1]
		g.Override, g.Final = &o, o.Points
	}
	g.Feedback = feedback(a, need, unsafe)
	return g
}

// feedback turns an assessment into plain words for the students: what the
// result says, what to do next; never who did what wrong.
func feedback(a Assessment, need, unsafe int) []string {
	var out []string
	if a.ReadingCount < need {
		out = append(out, fmt.Sprintf("The run has %d of the %d readings a complete run needs.", a.ReadingCount, need))
	}
	switch a.Verdict {
	case Consistent:
		out = append(out, fmt.Sprintf("Your %s agrees with theory (%+.1f %%, z = %+.1f).", a.ResultName, a.PercentDiff, a.Z))
	case Check, Off:
		if a.ResultUnit != "" {
			out = append(out, fmt.Sprintf("Your %s differs from theory by %+.1f %% (z = %+.1f).", a.ResultName, a.PercentDiff, a.Z))
		}
	case NeedData:
		out = append(out, "There are not enough readings for a result yet.")
	}
	for _, d := range a.Diagnoses {
		s := "Likely cause: " + d.Cause + ". Next time: " + d.Action + "."
		if len(d.Alternatives) > 0 {
			s += " (It could also be " + strings.Join(causesOf(d.Alternatives), "; or ") + ".)"
		}
		out = append(out, s)
	}
	if unsafe > 0 {
		out = append(out, fmt.Sprintf("%d reading(s) went past a safety limit of the set-up: keep within the equipment's ratings.", unsafe))
	}
	return out
}

func causesOf(codes []string) []string {
	out := make([]string, 0, len(codes))
	for _, c := range codes {
		if e, ok := catalogue[c]; ok {
			out = append(out, e.Cause)
		}
	}
	return out
}

// UnsafeReadings counts the readings that broke one of the bench's safety
// limits (corrections excluded).
func UnsafeReadings(b Bench, readings []Reading) int {
	e, ok := LookupExperiment(b.Experiment)
	if !ok {
		return 0
	}
	c, err := e.convertConstants(b.Constants)
	if err != nil {
		return 0
	}
	gone := Superseded(readings)
	n := 0
	for _, r := range readings {
		if gone[r.ID] {
			continue
		}
		v, err := e.convertReading("values", r.Values)
		if err != nil {
			continue
		}
		if _, _, unsafe, _ := e.safety(c, []siReading{{values: v}}); unsafe {
			n++
		}
	}
	return n
}

// RoundToUncertainty writes v and u with u at two significant figures when
// it starts with 1 or 2, else one, and v to the same decimal place, as plain
// numbers for a spreadsheet // common practice.
func RoundToUncertainty(v, u float64) (string, string) {
	if !(u > 0) || math.IsInf(u, 0) || math.IsNaN(v) {
		return strconv.FormatFloat(v, 'f', -1, 64), ""
	}
	dec := uncertaintyDecimals(u)
	if dec >= 0 {
		return fmt.Sprintf("%.*f", dec, roundTo(v, dec)), fmt.Sprintf("%.*f", dec, roundTo(u, dec))
	}
	p := math.Pow(10, float64(-dec))
	return fmt.Sprintf("%.0f", math.Round(v/p)*p), fmt.Sprintf("%.0f", math.Round(u/p)*p)
}

// GradeRow is one group and experiment in the gradebook.
type GradeRow struct {
	Bench      Bench
	Assessment Assessment
	Grade      Grade
	Readings   []Reading
	Unsafe     int
}

// GradeRoom grades every bench of a session. overrides are by bench id, in
// time order. Rows come in room order.
func GradeRoom(benches []Bench, readings map[uint64][]Reading, overrides map[uint64][]Override, tol Tolerance, p Policy) []GradeRow {
	rows := make([]GradeRow, 0, len(benches))
	for _, b := range benches {
		rs := readings[b.ID]
		a := Assess(b, rs, tol)
		unsafe := UnsafeReadings(b, rs)
		rows = append(rows, GradeRow{Bench: b, Assessment: a, Readings: rs, Unsafe: unsafe,
			Grade: GradeOf(b.Experiment, a, unsafe, overrides[b.ID], p)})
	}
	sort.SliceStable(rows, func(i, j int) bool {
		if rows[i].Bench.Row != rows[j].Bench.Row {
			return rows[i].Bench.Row < rows[j].Bench.Row
		}
		return rows[i].Bench.Column < rows[j].Bench.Column
	})
	return rows
}
