package domain

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"
	"unicode"
	"unicode/utf8"

	"example.com/fluxroom/domain/fit"
)

// Verdict is the state of a bench's result. Values are append-only.
type Verdict int

// Verdicts.
const (
	VerdictUnspecified Verdict = iota
	NeedData
	Consistent
	Check
	Off
	// Unsafe: a reading exceeded a safety limit of the bench.
	Unsafe
	// Stalled: no new reading for a while although the room moves on. Set
	// by the room view, never by Assess.
	Stalled
)

// Label is the verdict in the words the dashboard and exports use.
func (v Verdict) Label() string {
	switch v {
	case NeedData:
		return "need data"
	case Consistent:
		return "consistent"
	case Check:
		return "check"
	case Off:
		return "off"
	case Unsafe:
		return "unsafe"
	case Stalled:
		return "stalled"
	}
	return "unknown"
}

// Tolerance is a course's rule for turning a discrepancy into a verdict.
//
// A result is consistent when |z| ≤ ZConsistent or its percent difference is
// within GoodPercent; off when |z| > ZOff and the percent difference exceeds
// AcceptablePercent; otherwise check.
type Tolerance struct {
	ZConsistent       float64
	ZOff              float64
	GoodPercent       float64
	AcceptablePercent float64
}

// DefaultTolerance returns the profile used when a course sets none: agreement
// within 2 combined standard uncertainties, and the 5 % / 10 % bands many
// introductory courses use // common practice (PHYSICS.md §2).
func DefaultTolerance() Tolerance {
	return Tolerance{ZConsistent: 2, ZOff: 3, GoodPercent: 5, AcceptablePercent: 10}
}

func (t Tolerance) verdict(z, pct float64) Verdict {
	az, ap := math.Abs(z), math.Abs(pct)
	switch {
	case az <= t.ZConsistent || ap <= t.GoodPercent:
		return Consistent
	case az > t.ZOff && ap > t.AcceptablePercent:
		return Off
	}
	return Check
}

// Diagnosis is a likely cause of a discrepancy, with the numbers behind it.
type Diagnosis struct {
	// Code is stable and append-only, "<experiment>.<cause>".
	Code     string
	Cause    string
	Evidence string
	Action   string
	// Alternatives are codes that fit the numbers about as well.
	Alternatives []string
	// ReadingID is the one reading the diagnosis is about, when it is
	// about one: the reading to re-take.
	ReadingID string
	// Short is the cause in at most four words, for a room's tile.
	Short string
}

// Assessment is the judged state of one bench.
type Assessment struct {
	Verdict   Verdict
	Reason    string
	Diagnoses []Diagnosis
	// Measured and Predicted are the result and the theory value in SI.
	Measured, Predicted Measurement
	// ResultUnit is the SI unit of Measured and Predicted.
	ResultUnit string
	// Z is (measured - predicted) / combined standard uncertainty.
	Z float64
	// PercentDiff is 100·(measured/predicted - 1).
	PercentDiff float64
	// ResultName says what Measured is: "slope", "e/m", "B/B_theory".
	ResultName string
	// Budget says which inputs dominate the combined uncertainty.
	Budget []BudgetItem
	// Caution is the safety text for an unsafe bench, or for a reading
	// at a limit (within its meter's resolution) while the verdict stays
	// the data's.
	Caution string
	// Headline is the bench's state in at most four plain words, for a
	// tile seen across a room: the likeliest cause, what is missing, or
	// what broke a limit. The Reason says it all.
	Headline string
	// Breach says, in sentences, what broke which limit on an unsafe
	// bench ("Heater voltage 7.4 V (reading #41) is above the bench limit
	// of 6.3 V."), and BreachReadingIDs are the readings that did.
	Breach           string
	BreachReadingIDs []string
	// Plot is what the bench detail draws.
	Plot *Plot
	// Notes are further results in words, such as an experiment's linear
	// forms fitted on their own.
	Notes []string
	// Fit is the line fitted to the readings, when there is one.
	Fit *fit.Line
	// FitX and FitY name the fitted values; their units are SI.
	FitX, FitY      string
	ReadingCount    int
	LastReadingAt   time.Time
	ExperimentTitle string

	// scatter is the run's scatter against its instruments, which the
	// judging reports after the experiment's own findings.
	scatter scatter
}

// Assess judges a bench from its readings. The bench must have passed
// ValidateBench and each reading ValidateReading; anything else is reported
// as a need-data verdict with the reason, never a panic.
func Assess(b Bench, readings []Reading, tol Tolerance) Assessment {
	return assess(b, readings, tol, nil, true)
}

// AssessMemo is Assess for the room's judge, after every reading: the same
// verdict, reasons, fit and diagnoses, with the work on readings judged
// before taken from the bench's Memo (nil: none), and without the Plot,
// which only the bench detail draws (with Assess) and which would be most
// of the judging's allocations.
func AssessMemo(b Bench, readings []Reading, tol Tolerance, m *Memo) Assessment {
	return assess(b, readings, tol, m, false)
}

func assess(b Bench, readings []Reading, tol Tolerance, m *Memo, plot bool) Assessment {
	e, ok := LookupExperiment(b.Experiment)
	if !ok {
		return Assessment{Verdict: NeedData, Reason: fmt.Sprintf("unknown experiment %q", b.Experiment)}
	}
	if judges[e.ID] == nil {
		return Assessment{Verdict: NeedData, Reason: "not judged in this build", ExperimentTitle: e.Title}
	}
	c, err := m.constants(e, b.Constants)
	if err != nil {
		return Assessment{Verdict: NeedData, Reason: "bench constants need fixing: " + err.Error(), ExperimentTitle: e.Title}
	}
	rs := m.readings(len(readings))
	var last time.Time
	gone := Superseded(readings)
	for i, r := range readings {
		// Corrected readings are converted too, so that the memo's
		// entries stay in line with the readings.
		v, ok := m.convert(e, i, r)
		if gone[r.ID] {
			continue // corrected by a later reading; kept for the record
		}
		if !ok {
			continue // rejected at submission; never stored
		}
		// Readings are numbered on their bench, 1, 2, 3…, corrected ones
		// included, as the bench's tables number them.
		rs = append(rs, siReading{values: v, at: r.ReceivedAt, id: r.ID, seq: uint64(i + 1)})
		if r.ReceivedAt.After(last) {
			last = r.ReceivedAt
		}
	}
	var a Assessment
	if len(rs) < e.MinReadings {
		a = Assessment{Verdict: NeedData, Reason: fmt.Sprintf("%d of %d readings needed for a first verdict", len(rs), e.MinReadings)}
	} else {
		var fs findings
		a, fs = judges[e.ID](c, rs, tol, plot)
		if a.Plot != nil {
			a.Plot.inTypedUnits(readings)
		}
		fs.addScatter(a.scatter)
		ds, raise := fs.ranked()
		a.Diagnoses = ds
		if raise && a.Verdict == Consistent {
			a.Verdict = Check
		}
		if len(ds) > 0 && a.Verdict != NeedData {
			a.Reason = "likely " + ds[0].Cause + " (" + ds[0].Evidence + ")" + alsoPossible(ds[0]) + ". " + a.Reason
		}
	}
	a.ReadingCount = len(rs)
	a.LastReadingAt = last
	a.ExperimentTitle = e.Title
	a.Headline = headline(a, len(rs), e.MinReadings)
	reason, caution, unsafe, atLimit := e.safety(c, rs)
	switch {
	case unsafe:
		a.Verdict, a.Caution = Unsafe, caution
		a.Breach, a.BreachReadingIDs = reason.text, reason.readings
		a.Headline = reason.short
		a.Reason = "UNSAFE: " + reason.text + " " + a.Reason
	case atLimit != "":
		a.Caution = atLimit
	}
	return a
}

// alsoPossible names a diagnosis' alternatives, so a close call is never a
// silent pick.
func alsoPossible(d Diagnosis) string {
	if len(d.Alternatives) == 0 {
		return ""
	}
	return " (also possible: " + strings.Join(d.Alternatives, ", ") + ")"
}

// safety checks every reading against the bench's limits. The first breach
// found in each value is reported; any breach makes the bench unsafe,
// whatever the data say. A reading past its limit by no more than its
// meter's resolution is at the limit: that meter cannot tell it from the
// limit itself, so it is a caution (atLimit), not an unsafe verdict
// // common practice.
func (e *Experiment) safety(c map[string]Measurement, rs []siReading) (reason breach, caution string, unsafe bool, atLimit string) {
	var reasons, cautions, limits, shorts []string
	var ids []string
	for _, s := range e.Values {
		if s.SafetyLimit == "" {
			continue
		}
		limit := c[s.SafetyLimit].Value
		var res float64
		if s.Resolution != "" {
			res = c[s.Resolution].Value
		}
		at := ""
		for _, r := range rs {
			m, ok := r.values.get(s.Name)
			if !ok || math.Abs(m.Value) <= limit {
				continue
			}
			v, l := distinctDigits(math.Abs(m.Value), limit)
			unit := siUnit(s.Dim)
			if math.Abs(m.Value)-limit <= res {
				if at == "" {
					at = fmt.Sprintf("At the limit: %s %s %s (reading #%d) is at the bench limit of %s %s, within the meter's %s %s resolution.",
						s.Label, v, unit, r.seq, l, unit, strconv.FormatFloat(res, 'g', -1, 64), unit)
				}
				continue
			}
			reasons = append(reasons, fmt.Sprintf("%s %s %s (reading #%d) is above the bench limit of %s %s.", capitalize(s.Label), v, unit, r.seq, l, unit))
			ids = append(ids, r.id)
			shorts = append(shorts, withoutSymbol(s.Label)+" over limit")
			cautions = append(cautions, s.Caution)
			at = ""
			break
		}
		if at != "" {
			limits = append(limits, at+" "+s.Caution)
		}
	}
	if len(limits) > 0 {
		atLimit = strings.Join(limits, " ") + " " + safetyDeferral
	}
	if len(reasons) == 0 {
		return breach{}, "", false, atLimit
	}
	cautions = append(cautions, safetyDeferral)
	return breach{text: strings.Join(reasons, " "), short: shorts[0], readings: ids}, strings.Join(cautions, " "), true, atLimit
}

// breach is what broke a bench's limits: sentences, in a few words, and
// the readings.
type breach struct {
	text, short string
	readings    []string
}

// headline is an assessment's state in at most four words (Headline).
func headline(a Assessment, counted, min int) string {
	switch {
	case counted < min:
		return fmt.Sprintf("%d of %d readings", counted, min)
	case len(a.Diagnoses) > 0:
		return a.Diagnoses[0].Short
	case a.Verdict == NeedData:
		return "needs other readings"
	case a.Verdict == Consistent:
		return "agrees with theory"
	case a.ResultUnit != "":
		return fmt.Sprintf("%+.0f %% from theory", a.PercentDiff)
	}
	return a.Verdict.Label()
}

// capitalize starts a sentence with its label: "heater voltage" → "Heater voltage".
func capitalize(s string) string {
	if s == "" {
		return s
	}
	r, n := utf8.DecodeRuneInString(s)
	return string(unicode.ToUpper(r)) + s[n:]
}

// distinctDigits writes a value and the limit it passed with as many
// significant digits as it takes to tell them apart (at least three), so a
// message never reads "5 A is above the limit of 5 A".
func distinctDigits(v, limit float64) (string, string) {
	for p := 3; p < 17; p++ {
		a, b := strconv.FormatFloat(v, 'g', p, 64), strconv.FormatFloat(limit, 'g', p, 64)
		if a != b {
			return a, strconv.FormatFloat(limit, 'g', -1, 64)
		}
	}
	return strconv.FormatFloat(v, 'g', -1, 64), strconv.FormatFloat(limit, 'g', -1, 64)
}

// safetyDeferral ends every caution: fluxroom's limits are reminders, not
// the rules that apply.
const safetyDeferral = "Follow local codes, your institution's safety rules and the equipment maker's limits."

// BudgetItem is one input's share of a result's uncertainty.
type BudgetItem struct {
	Input string
	// RelU is the input's contribution to the relative standard
	// uncertainty of the result.
	RelU float64
	// Share is its fraction of the combined variance, 0–1.
	Share float64
}

// budget builds a budget from relative contributions, largest first.
func budget(items ...BudgetItem) []BudgetItem {
	var total float64
	for _, it := range items {
		total += it.RelU * it.RelU
	}
	out := make([]BudgetItem, 0, len(items))
	for _, it := range items {
		if total > 0 {
			it.Share = it.RelU * it.RelU / total
		}
		out = append(out, it)
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].Share > out[j].Share })
	return out
}

// combine judges a measured value against a prediction.
func combine(measured, predicted Measurement, tol Tolerance) (z, pct float64, v Verdict) {
	u := math.Hypot(measured.Uncertainty, predicted.Uncertainty)
	if u > 0 {
		z = (measured.Value - predicted.Value) / u
	} else if measured.Value != predicted.Value {
		z = math.Inf(sign(measured.Value - predicted.Value))
	}
	if predicted.Value != 0 {
		pct = 100 * (measured.Value/predicted.Value - 1)
	}
	return z, pct, tol.verdict(z, pct)
}

func sign(x float64) int {
	if x < 0 {
		return -1
	}
	return 1
}

// resolutionU is the standard uncertainty of a digital reading with
// resolution res: a rectangular distribution of width res
// [pub: JCGM 100:2008 (GUM) §4.3.7 and F.2.2.1].
func resolutionU(res float64) float64 { return res / (2 * math.Sqrt(3)) }

// withoutSymbol is a quantity's label without its symbol: "coil current I"
// → "coil current".
func withoutSymbol(label string) string {
	w := strings.Fields(label)
	if len(w) > 1 && utf8.RuneCountInString(w[len(w)-1]) <= 2 {
		w = w[:len(w)-1]
	}
	return strings.Join(w, " ")
}
