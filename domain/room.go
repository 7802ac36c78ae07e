package domain

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"time"
)

// BenchResult is what the room view needs of one bench's assessment.
type BenchResult struct {
	BenchID    uint64
	Label      string
	Experiment string
	Verdict    Verdict
	// Ratio is measured/predicted (B/B_theory is already a ratio), and
	// RelU its relative uncertainty; zero until there is a result.
	Ratio, RelU   float64
	ReadingCount  int
	LastReadingAt time.Time
	// Fingerprint identifies the readings' values as typed, to spot two
	// benches with identical data.
	Fingerprint string
}

// ResultOf reduces an assessment to a BenchResult.
func ResultOf(b Bench, a Assessment, readings []Reading) BenchResult {
	return ResultOfMemo(b, a, readings, nil)
}

// ResultOfMemo is ResultOf with the bench's Memo (nil: none), which keeps
// the fingerprint of the readings already seen.
func ResultOfMemo(b Bench, a Assessment, readings []Reading, m *Memo) BenchResult {
	r := BenchResult{BenchID: b.ID, Label: b.Label, Experiment: b.Experiment, Verdict: a.Verdict,
		ReadingCount: a.ReadingCount, LastReadingAt: a.LastReadingAt}
	if a.Predicted.Value != 0 && a.ResultUnit != "" {
		r.Ratio = a.Measured.Value / a.Predicted.Value
		r.RelU = math.Hypot(a.Measured.RelUncertainty(), a.Predicted.Uncertainty/math.Abs(a.Predicted.Value))
	}
	if e, ok := LookupExperiment(b.Experiment); ok && len(readings) >= 3 {
		r.Fingerprint = m.fingerprintOf(e, readings)
	}
	return r
}

// RoomFinding is something about the room as a whole.
type RoomFinding struct {
	Code       string
	Experiment string
	Message    string
	BenchIDs   []uint64
	// MedianRatio and Spread describe the groups' results (spread is the
	// robust relative spread, MAD/median); Groups is how many were judged.
	MedianRatio, Spread float64
	Groups              int
}

// Room-level codes. Append-only.
var (
	CodeSharedCause = entry(CatalogueEntry{Code: "room.shared_cause", Level: Raw,
		Cause:  "most groups on this experiment are off in the same direction by a similar ratio: the cause is likely shared (a bench constant, the handout or an instrument), not the groups",
		Action: "check what the groups share before correcting each one"})
	CodeIdenticalReadings = entry(CatalogueEntry{Code: "room.identical_readings", Level: Raw,
		Cause:  "two or more benches submitted identical readings",
		Action: "worth checking that each bench recorded its own measurements"})
)

// Room thresholds: "most" is at least 60 % of the judged groups and at least
// three; "similar" is a robust spread under 10 % of the median ratio
// // common practice.
const (
	sharedMinFraction = 0.6
	sharedMinGroups   = 3
	sharedMaxSpread   = 0.10
)

// RoomFindings looks across benches: per experiment, whether most groups
// share one discrepancy outside the tolerance's good band, and whether any
// benches' data are identical. The identical-data finding is for the
// instructor only and accuses no one.
func RoomFindings(results []BenchResult, tol Tolerance) []RoomFinding {
	byExp := map[string][]BenchResult{}
	for _, r := range results {
		if r.Ratio != 0 && (r.Verdict == Consistent || r.Verdict == Check || r.Verdict == Off) {
			byExp[r.Experiment] = append(byExp[r.Experiment], r)
		}
	}
	var out []RoomFinding
	for _, exp := range sortedKeys(byExp) {
		rs := byExp[exp]
		var hi, lo []BenchResult
		for _, r := range rs {
			if r.Verdict == Check || r.Verdict == Off {
				if r.Ratio > 1 {
					hi = append(hi, r)
				} else {
					lo = append(lo, r)
				}
			}
		}
		for _, side := range [][]BenchResult{hi, lo} {
			if len(side) < sharedMinGroups || float64(len(side)) < sharedMinFraction*float64(len(rs)) {
				continue
			}
			ratios := make([]float64, len(side))
			ids := make([]uint64, len(side))
			for i, r := range side {
				ratios[i], ids[i] = r.Ratio, r.BenchID
			}
			med := median(ratios)
			spread := mad(ratios) / math.Abs(med)
			// Groups called check for a cause of their own (a skipped zero,
			// one slipped reading) can agree with theory: a ratio inside
			// the good band is no discrepancy to share.
			if spread > sharedMaxSpread || 100*math.Abs(med-1) <= tol.GoodPercent {
				continue
			}
			msg := fmt.Sprintf("%d of %d groups on %s read %.3g× theory (spread %.0f %%): %s", len(side), len(rs), exp, med, 100*spread,
				catalogue[CodeSharedCause].Cause)
			if hint := factorHint(exp, med); hint != "" {
				msg += "; the ratio matches " + hint
			}
			out = append(out, RoomFinding{Code: CodeSharedCause, Experiment: exp, Message: msg, BenchIDs: ids,
				MedianRatio: med, Spread: spread, Groups: len(rs)})
		}
	}
	same := map[string][]BenchResult{}
	for _, r := range results {
		if r.Fingerprint != "" {
			same[r.Fingerprint] = append(same[r.Fingerprint], r)
		}
	}
	for _, fp := range sortedKeys(same) {
		g := same[fp]
		if len(g) < 2 {
			continue
		}
		var labels []string
		var ids []uint64
		for _, r := range g {
			labels = append(labels, r.Label)
			ids = append(ids, r.BenchID)
		}
		sort.Strings(labels)
		out = append(out, RoomFinding{Code: CodeIdenticalReadings, Experiment: g[0].Experiment, BenchIDs: ids,
			Message: fmt.Sprintf("benches %s submitted identical readings (%d each): %s", strings.Join(labels, ", "), g[0].ReadingCount,
				catalogue[CodeIdenticalReadings].Action)})
	}
	return out
}

// factorHint names the catalogue entries of an experiment whose factor
// matches a room's median ratio within 2 %.
func factorHint(exp string, ratio float64) string {
	var codes []string
	for _, e := range Catalogue() {
		if !strings.HasPrefix(e.Code, exp+".") && !strings.HasPrefix(e.Code, "generic.") || e.Factor == 0 || e.Level == Recomputation {
			continue
		}
		if math.Signbit(e.Factor) == math.Signbit(ratio) && math.Abs(math.Log(math.Abs(ratio)/math.Abs(e.Factor))) < 0.02 {
			codes = append(codes, e.Code)
		}
	}
	return strings.Join(codes, ", ")
}

// StalledBenches returns the benches with readings whose last one is older than
// after while another bench in the room has one newer than that: a group
// that stopped while the room moves on.
func StalledBenches(results []BenchResult, now time.Time, after time.Duration) map[uint64]bool {
	var roomMoving bool
	for _, r := range results {
		if !r.LastReadingAt.IsZero() && now.Sub(r.LastReadingAt) < after {
			roomMoving = true
		}
	}
	out := map[uint64]bool{}
	if !roomMoving {
		return out
	}
	for _, r := range results {
		if !r.LastReadingAt.IsZero() && now.Sub(r.LastReadingAt) >= after && r.Verdict != Unsafe {
			out[r.BenchID] = true
		}
	}
	return out
}
