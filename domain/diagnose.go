package domain

import (
	"fmt"
	"math"
	"slices"
	"sort"
)

// Level is the kind of evidence a diagnosis rests on (PHYSICS.md §3).
type Level int

// Levels of evidence.
const (
	// Raw compares each raw reading with the physics prediction.
	Raw Level = iota + 1
	// Recomputation compares the group's own derived values with the tool's
	// recomputation from their raw readings.
	Recomputation
	// Shape looks at the fit: intercept, curvature, trends.
	Shape
)

func (l Level) String() string {
	switch l {
	case Raw:
		return "raw readings"
	case Recomputation:
		return "recomputation"
	case Shape:
		return "fit shape"
	}
	return "unknown"
}

// CatalogueEntry describes one diagnosis code.
type CatalogueEntry struct {
	Code  string
	Level Level
	Cause string
	// Short is the cause in at most four plain words, for a room's tile.
	Short string
	// Action is what the instructor can suggest.
	Action string
	// Factor is the ratio measured/expected the mistake produces, when it
	// has one; 0 for diagnoses found from the shape of the data.
	Factor float64
	// Lookalikes are codes whose numbers can be the same; the diagnosis
	// lists them as alternatives when they match too.
	Lookalikes []string
}

// catalogue holds every diagnosis code. Codes are append-only.
var catalogue = map[string]CatalogueEntry{}

func entry(e CatalogueEntry) string {
	if _, dup := catalogue[e.Code]; dup {
		panic("domain: diagnosis code registered twice: " + e.Code)
	}
	if e.Short == "" {
		e.Short = shortCauses[e.Code]
	}
	catalogue[e.Code] = e
	return e.Code
}

// Catalogue lists every diagnosis code, sorted.
func Catalogue() []CatalogueEntry {
	out := make([]CatalogueEntry, 0, len(catalogue))
	for _, e := range catalogue {
		out = append(out, e)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].Code < out[j].Code })
	return out
}

// Generic diagnosis codes, shared by every experiment.
var (
	CodeSignReversed = entry(CatalogueEntry{Code: "generic.sign_reversed", Level: Raw, Factor: -1,
		Cause:  "the result has the right size but the wrong sign: leads, probe or direction reversed",
		Action: "check the polarity of the supply leads and which way the probe faces, then retake one point"})
	CodeDecadeSlip = entry(CatalogueEntry{Code: "generic.decade_slip", Level: Raw,
		Cause:      "the result is off by a power of ten: a unit or decimal slip (G vs mT, cm vs m, mA vs A)",
		Action:     "check the unit chosen for each value against the meter's range and scale",
		Lookalikes: []string{"coil_force.mass_as_force"}})
	CodeDecimalSlipPoint = entry(CatalogueEntry{Code: "generic.decimal_slip_point", Level: Shape,
		Cause:  "one reading is off by a power of ten from the others: a decimal point slipped in one value",
		Action: "re-take this point"})
	CodeDrift = entry(CatalogueEntry{Code: "generic.drift", Level: Shape,
		Cause:  "the residuals trend with time: heating or sensor drift during the run",
		Action: "switch off between readings, let the set-up settle, re-zero and retake"})
	CodeTooGood = entry(CatalogueEntry{Code: "generic.too_good", Level: Shape,
		Cause:  "the scatter is far smaller than the instruments' resolution allows",
		Action: "look at how the values were recorded (rounded, copied or computed) before grading"})
	CodeProbeNotAligned = entry(CatalogueEntry{Code: "generic.probe_not_aligned", Level: Raw,
		Cause:  "every reading is low by the same factor: the probe is probably not perpendicular to the field (ρ = cos θ)",
		Action: "turn the probe until the reading peaks, then retake"})
)

// Diagnosis codes added after the first catalogue. Append-only.
var (
	CodeScatterBeyond = entry(CatalogueEntry{Code: "generic.scatter_beyond_instruments", Level: Shape,
		Cause:  "the readings disagree with each other far more than the instruments allow: part of the run was taken differently (another scale, setting or set-up)",
		Action: "find the readings that stand apart in the plot, and retake them with one set-up and one meter scale"})
	CodeOutlierPoint = entry(CatalogueEntry{Code: "generic.outlier_point", Level: Shape,
		Cause:  "one reading stands far apart from the others, by no factor a known slip gives",
		Action: "re-take this point"})
)

// finding is a candidate diagnosis with its score (higher is more likely).
type finding struct {
	Diagnosis
	score float64
	// raise turns a consistent verdict into check.
	raise bool
}

type findings []finding

// add records a candidate.
func (fs *findings) add(code, evidence string, score float64, raise bool) {
	e := catalogue[code]
	*fs = append(*fs, finding{Diagnosis: Diagnosis{Code: code, Cause: e.Cause, Short: e.Short, Action: e.Action, Evidence: evidence}, score: score, raise: raise})
}

// addPoint records a candidate about one reading, which the action names
// so that the group knows which point to re-take.
func (fs *findings) addPoint(code string, r siReading, evidence string, score float64) {
	fs.add(code, evidence, score, true)
	d := &(*fs)[len(*fs)-1].Diagnosis
	d.ReadingID = r.id
	d.Action = fmt.Sprintf("%s: reading #%d", d.Action, r.seq)
}

// drop removes the candidates with the given code: a finding that explains
// the whole run takes the place of one about a single reading.
func (fs *findings) drop(code string) {
	*fs = slices.DeleteFunc(*fs, func(f finding) bool { return f.Code == code })
}

// onlyPoints reports whether every candidate so far is about one reading
// (or there is none): nothing yet explains the run as a whole.
func (fs findings) onlyPoints() bool {
	for _, f := range fs {
		if f.ReadingID == "" {
			return false
		}
	}
	return true
}

// has reports whether a candidate with one of the codes was found.
func (fs findings) has(codes ...string) bool {
	for _, f := range fs {
		for _, c := range codes {
			if f.Code == c {
				return true
			}
		}
	}
	return false
}

// matchFactor adds every signature whose factor is within tolerance of the
// ratio ρ: |ln ρ − ln f| ≤ max(2·u_rel, 2 %) (PHYSICS.md §3). The score falls
// from 1 (exact) to 0.5 (at the edge of the tolerance).
func (fs *findings) matchFactor(rho, uRel float64, what string, codes ...string) {
	tol := math.Max(2*uRel, 0.02)
	for _, code := range codes {
		f := catalogue[code].Factor
		if f == 0 || math.Signbit(f) != math.Signbit(rho) || rho == 0 {
			continue
		}
		d := math.Abs(math.Log(math.Abs(rho)) - math.Log(math.Abs(f)))
		if d <= tol {
			fs.add(code, fmt.Sprintf("%s ratio %.4g, this mistake gives ×%.4g", what, rho, f), 1-0.5*d/tol, true)
		}
	}
}

// matchDecade adds generic.decade_slip when ρ is within tolerance of a
// power of ten from 10⁻⁸ to 10⁸ other than 1, and reports whether it did.
func (fs *findings) matchDecade(rho, uRel float64, what string) bool {
	if rho <= 0 {
		return false
	}
	tol := math.Max(2*uRel, 0.02)
	k := math.Round(math.Log10(rho))
	if k == 0 || math.Abs(k) > 8 {
		return false
	}
	if d := math.Abs(math.Log(rho) - k*math.Ln10); d <= tol {
		fs.add(CodeDecadeSlip, fmt.Sprintf("%s ratio %.4g ≈ 10^%d", what, rho, int(k)), 1-0.5*d/tol, true)
		return true
	}
	return false
}

// ranked orders the candidates and folds ties into alternatives: a
// candidate within 0.1 of a better one's score, or a documented look-alike
// that also matched, is listed as an alternative of it rather than
// silently dropped.
func (fs findings) ranked() (ds []Diagnosis, raise bool) {
	sort.SliceStable(fs, func(i, j int) bool { return fs[i].score > fs[j].score })
	used := make([]bool, len(fs))
	for i := range fs {
		if used[i] {
			continue
		}
		used[i] = true
		d := fs[i].Diagnosis
		raise = raise || fs[i].raise
		look := map[string]bool{}
		for _, c := range catalogue[d.Code].Lookalikes {
			look[c] = true
		}
		for j := i + 1; j < len(fs); j++ {
			if used[j] || fs[j].Code == d.Code {
				if fs[j].Code == d.Code {
					used[j] = true
				}
				continue
			}
			if fs[i].score-fs[j].score <= 0.1 || look[fs[j].Code] {
				used[j] = true
				d.Alternatives = append(d.Alternatives, fs[j].Code)
			}
		}
		ds = append(ds, d)
	}
	return ds, raise
}

// LevelOf returns the level of evidence of a diagnosis code.
func LevelOf(code string) Level { return catalogue[code].Level }
