package domain

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"time"
)

// QuantitySpec declares one bench constant or one reading value of an
// experiment: its name on the wire, its dimension, and its limits.
type QuantitySpec struct {
	// Name is the key in Bench.Constants or Reading.Values.
	Name string
	// Label is what people see, with the symbol: "turns N".
	Label string
	Dim   Dimension
	// Unit is the unit the dashboard offers first.
	Unit string
	// Default is the value used when the instructor sets none (constants
	// only), in Unit.
	Default float64
	// DefaultRelU is the relative standard uncertainty used when none is
	// given.
	DefaultRelU float64
	// Min and Max bound what is physically possible for this set-up, in SI;
	// outside them the input is rejected as a typing mistake. NaN: no bound.
	Min, Max float64
	// MinExclusive makes Min itself invalid (lengths must be > 0).
	MinExclusive bool
	// Integer requires a whole number (turns).
	Integer bool
	// Hint explains Max to the person who typed past it; the likeliest
	// unit slip for the value they typed is added to it (slipHint).
	Hint string
	// Usual is the range, in SI, that a teaching set-up usually gives:
	// a value typed past Max is matched against it to name the unit slip.
	Usual [2]float64
	// Optional values may be left out of a reading.
	Optional bool
	// SafetyLimit names the bench constant that caps this value; a reading
	// above it makes the bench unsafe at once.
	SafetyLimit string
	// Caution is shown with an unsafe reading of this value.
	Caution string
	// Resolution names the bench constant that is the resolution of the
	// meter this value is read on: a reading past SafetyLimit by no more
	// than that is at the limit (a caution), not above it. Empty: none, the
	// limit is strict.
	Resolution string
}

// Experiment is one kind of bench work: what the instructor sets, what the
// students submit, and how the result is judged.
type Experiment struct {
	ID        string
	Title     string
	Constants []QuantitySpec
	Values    []QuantitySpec
	// MinReadings is how many readings the first verdict needs.
	MinReadings int
}

// judge judges an experiment's converted readings; with plot it also builds
// the Assessment's Plot, which only the bench detail draws.
type judge func(c map[string]Measurement, rs []siReading, tol Tolerance, plot bool) (Assessment, findings)

// siReading is a reading converted to SI.
type siReading struct {
	values siValues
	at     time.Time
	id     string
	// seq is the reading's number on its bench (1, 2, 3…, corrected
	// readings included), as the dashboard and station number them.
	seq uint64
}

// has reports whether the reading carries the optional value name.
func (r siReading) has(name string) bool { _, ok := r.values.get(name); return ok }

// v is the SI value of name.
func (r siReading) v(name string) float64 { m, _ := r.values.get(name); return m.Value }

// siValues are a reading's values in SI, in the experiment's order. A
// reading has two to six, looked up for every reading at every judging: a
// scan of a small slice beats hashing into a map.
type siValues []namedMeasurement

type namedMeasurement struct {
	name string
	m    Measurement
}

func (v siValues) get(name string) (Measurement, bool) {
	for i := range v {
		if v[i].name == name {
			return v[i].m, true
		}
	}
	return Measurement{}, false
}

var experiments = map[string]*Experiment{}

func register(e *Experiment) {
	if _, dup := experiments[e.ID]; dup {
		panic("domain: experiment registered twice: " + e.ID)
	}
	experiments[e.ID] = e
}

// LookupExperiment returns the experiment with the given id. The
// experiment is the registry's own, shared by every caller: read it, never
// change it.
func LookupExperiment(id string) (*Experiment, bool) {
	e, ok := experiments[id]
	return e, ok
}

// ExperimentIDs lists the registered experiments, sorted.
func ExperimentIDs() []string {
	ids := make([]string, 0, len(experiments))
	for id := range experiments {
		ids = append(ids, id)
	}
	sort.Strings(ids)
	return ids
}

// DefaultConstants returns the experiment's constants at their defaults.
func (e *Experiment) DefaultConstants() map[string]Quantity {
	m := make(map[string]Quantity, len(e.Constants))
	for _, s := range e.Constants {
		m[s.Name] = Quantity{Value: s.Default, Unit: s.Unit}
	}
	return m
}

// check converts q and checks it against the spec's limits. fieldOf names
// the field; it is only called when there is something to report, which
// keeps the common case free of formatting.
func (s QuantitySpec) check(fieldOf func() string, q Quantity, vs *violations) (Measurement, bool) {
	m, ok := toSIFast(q, s.Dim)
	if !ok {
		_, err := ToSI(fieldOf(), q, s.Dim)
		*vs = append(*vs, err.(*ValidationError).Violations...)
		return Measurement{}, false
	}
	field := ""
	if !math.IsNaN(s.Min) && (m.Value < s.Min || (s.MinExclusive && m.Value == s.Min)) ||
		!math.IsNaN(s.Max) && m.Value > s.Max || s.Integer && m.Value != math.Trunc(m.Value) {
		field = fieldOf()
	}
	ok = true
	if !math.IsNaN(s.Min) && (m.Value < s.Min || (s.MinExclusive && m.Value == s.Min)) {
		cmp := "≥"
		if s.MinExclusive {
			cmp = ">"
		}
		vs.add(field+".value", "%s must be %s %g %s, got %g %s", s.Label, cmp, s.Min, siUnit(s.Dim), q.Value, q.Unit)
		ok = false
	}
	if !math.IsNaN(s.Max) && m.Value > s.Max {
		reason := fmt.Sprintf("%s must be ≤ %g %s, got %g %s", s.Label, s.Max, siUnit(s.Dim), q.Value, q.Unit)
		hint := s.Hint
		if slip := s.slipHint(q); slip != "" {
			hint = strings.TrimRight(hint+": "+slip, " ")
			hint = strings.TrimPrefix(hint, ": ")
		}
		if hint != "" {
			reason += " (" + hint + ")"
		}
		vs.add(field+".value", "%s", reason)
		ok = false
	}
	if s.Integer && m.Value != math.Trunc(m.Value) {
		vs.add(field+".value", "%s must be a whole number, got %g", s.Label, q.Value)
		ok = false
	}
	if m.Uncertainty == 0 {
		m.Uncertainty = math.Abs(m.Value) * s.DefaultRelU
	}
	return m, ok
}

func siUnit(d Dimension) string {
	switch d {
	case Length:
		return "m"
	case Current:
		return "A"
	case Force:
		return "N"
	case MagneticField:
		return "T"
	case Voltage:
		return "V"
	case Mass:
		return "kg"
	case CoilConstant:
		return "T/A"
	case TurnDensity:
		return "1/m"
	case ForcePerCurrent:
		return "N/A"
	case ChargeToMassRatio:
		return "C/kg"
	}
	return ""
}

// convertReading checks a reading's values and converts them to SI, in the
// order the experiment declares them; values that fail are left out.
func (e *Experiment) convertReading(prefix string, values Values) (siValues, error) {
	var vs violations
	out := make(siValues, 0, len(e.Values))
	for _, s := range e.Values {
		fieldOf := func() string { return fmt.Sprintf("%s[%q]", prefix, s.Name) }
		q, ok := values.Get(s.Name)
		if !ok {
			if !s.Optional {
				vs.add(fieldOf(), "is missing: %s needs %s", e.Title, s.Label)
			}
			continue
		}
		if m, ok := s.check(fieldOf, q, &vs); ok {
			out = append(out, namedMeasurement{name: s.Name, m: m})
		}
	}
	if len(out) < len(values) || len(vs) > 0 {
		known := map[string]bool{}
		for _, s := range e.Values {
			known[s.Name] = true
		}
		for _, nq := range values { // sorted by name
			if !known[nq.Name] {
				vs.add(fmt.Sprintf("%s[%q]", prefix, nq.Name), "experiment %s takes no value %q", e.ID, nq.Name)
			}
		}
	}
	return out, vs.err()
}

func (e *Experiment) convertConstants(c map[string]Quantity) (map[string]Measurement, error) {
	var vs violations
	out := make(map[string]Measurement, len(e.Constants))
	for _, s := range e.Constants {
		q, ok := c[s.Name]
		if !ok {
			q = Quantity{Value: s.Default, Unit: s.Unit}
		}
		if m, ok := s.check(func() string { return fmt.Sprintf("constants[%q]", s.Name) }, q, &vs); ok {
			out[s.Name] = m
		}
	}
	return out, vs.err()
}

func sortedKeys[V any](m map[string]V) []string {
	ks := make([]string, 0, len(m))
	for k := range m {
		ks = append(ks, k)
	}
	sort.Strings(ks)
	return ks
}
