package domain

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// slipHint names the likeliest unit slip for a value typed past the spec's
// Max: a smaller unit of the same dimension in which the typed number would
// fall inside the range the set-up usually gives (Usual); the meter's own
// unit first, then the fewest decades away; a second guess only when it is
// about as likely. "4500 mT" for a solenoid's field
// gives "was it in µT typed as mT?"; "0.45 T" gives "was it in mT typed as
// T?". Without a usual range, or with no unit that fits, it is "".
func (s QuantitySpec) slipHint(q Quantity) string {
	lo, hi := s.Usual[0], s.Usual[1]
	typed, ok := units[normalizeUnit(q.Unit)]
	if !(lo > 0 && hi > lo) || !ok || q.Value == 0 {
		return ""
	}
	mid := math.Sqrt(lo * hi)
	type cand struct {
		sym     string
		own     bool    // the unit the set-up's meter reads in
		decades float64 // how many decades smaller
		miss    float64 // distance from mid, in logarithms
	}
	var cs []cand
	for sym, u := range units {
		if u.dim != typed.dim || u.factor >= typed.factor {
			continue
		}
		if v := math.Abs(q.Value) * u.factor; v >= lo && v <= hi {
			cs = append(cs, cand{sym, sym == normalizeUnit(s.Unit), math.Round(math.Log10(typed.factor / u.factor)), math.Abs(math.Log(v / mid))})
		}
	}
	// The meter's own unit first, then the nearest unit (one prefix
	// step before two), then the value nearest the usual range's middle.
	sort.Slice(cs, func(i, j int) bool {
		a, b := cs[i], cs[j]
		if a.own != b.own {
			return a.own
		}
		if a.decades != b.decades {
			return a.decades < b.decades
		}
		if a.miss != b.miss {
			return a.miss < b.miss
		}
		return a.sym < b.sym
	})
	var parts []string
	for i, c := range cs {
		// A second guess only when it is about as near a slip as the first.
		if i == 2 || i == 1 && c.decades > cs[0].decades {
			break
		}
		parts = append(parts, fmt.Sprintf("%s typed as %s", displayUnit(c.sym), displayUnit(normalizeUnit(q.Unit))))
	}
	if len(parts) == 0 {
		return ""
	}
	return "was it in " + strings.Join(parts, ", or ") + "?"
}

// displayUnit writes a unit symbol as people read it: the micro sign for u.
func displayUnit(sym string) string {
	if strings.HasPrefix(sym, "u") {
		return "µ" + sym[1:]
	}
	return sym
}

// decadeSlipUnits names the unit slips that multiply a value of dimension
// dim by 10^k: the true unit typed as another k decades larger ("G typed as
// mT" for k = 1). Slips from the set-up's own unit come first, then from its
// family (µT beside mT); at most two.
func decadeSlipUnits(dim Dimension, own string, k int) string {
	type pair struct {
		real, typed string
		own         bool // from the set-up's own unit
		kin         bool // from a unit of the own unit's family (mT, µT for T)
	}
	family := func(u string) string { return strings.TrimLeft(u, "mu") }
	var ps []pair
	for a, ua := range units {
		for b, ub := range units {
			if ua.dim != dim || ub.dim != dim || a == b || strings.Contains(a, "turns") || strings.Contains(b, "turns") {
				continue
			}
			if math.Round(math.Log10(ub.factor/ua.factor)) == float64(k) && math.Abs(math.Log10(ub.factor/ua.factor)-float64(k)) < 1e-9 {
				ps = append(ps, pair{a, b, a == own, family(a) == family(own)})
			}
		}
	}
	sort.Slice(ps, func(i, j int) bool {
		if ps[i].own != ps[j].own {
			return ps[i].own
		}
		if ps[i].kin != ps[j].kin {
			return ps[i].kin
		}
		return ps[i].real+ps[i].typed < ps[j].real+ps[j].typed
	})
	var parts []string
	for i, p := range ps {
		if i == 2 {
			break
		}
		parts = append(parts, displayUnit(p.real)+" typed as "+displayUnit(p.typed))
	}
	return strings.Join(parts, ", or ")
}
