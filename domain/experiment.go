package domain

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"time"
	"unicode"
	"unicode/utf8"
)

// Session is one lab section meeting in one room.
type Session struct {
	ID        uint64
	Title     string
	JoinCode  string
	CreatedAt time.Time
	// Tolerance is the session's verdict rule; the zero value means
	// DefaultTolerance.
	Tolerance Tolerance
	// StationsSeeVerdicts lets a bench's laptop see its own verdict and hint.
	StationsSeeVerdicts bool
	// GradingPolicy is the course's policy file as JSON; empty for
	// DefaultPolicy. It is parsed at the edges (internal/export).
	GradingPolicy string
	// Closed sessions take no readings; their join code stops working.
	Closed bool
}

// EffectiveTolerance is the session's tolerance with defaults filled in.
func (s Session) EffectiveTolerance() Tolerance {
	t := s.Tolerance
	d := DefaultTolerance
	if t.ZConsistent == 0 {
		t.ZConsistent = d.ZConsistent
	}
	if t.ZOff == 0 {
		t.ZOff = d.ZOff
	}
	if t.GoodPercent == 0 {
		t.GoodPercent = d.GoodPercent
	}
	if t.AcceptablePercent == 0 {
		t.AcceptablePercent = d.AcceptablePercent
	}
	return t
}

// ValidateTolerance checks a tolerance profile; zero fields mean "default".
func ValidateTolerance(prefix string, t Tolerance) error {
	var vs violations
	e := t
	full := Session{Tolerance: t}.EffectiveTolerance()
	for _, f := range []struct {
		name string
		v    float64
		max  float64
	}{{"z_consistent", e.ZConsistent, 10}, {"z_off", e.ZOff, 20}, {"good_percent", e.GoodPercent, 100}, {"acceptable_percent", e.AcceptablePercent, 100}} {
		if math.IsNaN(f.v) || f.v < 0 || f.v > f.max {
			vs.add(prefix+"."+f.name, "must be between 0 (the default) and %g, got %v", f.max, f.v)
		}
	}
	if len(vs) == 0 && full.ZOff < full.ZConsistent {
		vs.add(prefix+".z_off", "must be at least z_consistent (%g), got %g", full.ZConsistent, full.ZOff)
	}
	if len(vs) == 0 && full.AcceptablePercent < full.GoodPercent {
		vs.add(prefix+".acceptable_percent", "must be at least good_percent (%g), got %g", full.GoodPercent, full.AcceptablePercent)
	}
	return vs.err()
}

// Note is an instructor's note or acknowledgement on a bench.
type Note struct {
	BenchID uint64
	// Kind is NoteKindNote or NoteKindAcknowledged.
	Kind   string
	Text   string
	Author string
	At     time.Time
	// Points and PreviousPoints belong to a grade override.
	Points, PreviousPoints float64
}

// Note kinds.
const (
	NoteKindNote          = "note"
	NoteKindAcknowledged  = "acknowledged"
	NoteKindGradeOverride = "grade_override"
)

// Overrides collects the grade overrides of a session's notes by bench, in
// time order.
func Overrides(notes []Note) map[uint64][]Override {
	out := map[uint64][]Override{}
	for _, n := range notes {
		if n.Kind == NoteKindGradeOverride {
			out[n.BenchID] = append(out[n.BenchID], Override{BenchID: n.BenchID, Points: n.Points, Reason: n.Text,
				Author: n.Author, At: n.At, Previous: n.PreviousPoints})
		}
	}
	return out
}

// ValidateNote checks a note's text and author.
func ValidateNote(n Note) error {
	var vs violations
	if t := strings.TrimSpace(n.Text); n.Kind != NoteKindAcknowledged && (t == "" || utf8.RuneCountInString(t) > 1000 || !utf8.ValidString(t)) {
		vs.add("text", "must be 1–1000 characters")
	}
	if utf8.RuneCountInString(n.Author) > 80 || !utf8.ValidString(n.Author) {
		vs.add("author", "must be at most 80 characters")
	}
	return vs.err()
}

// Bench is one station in the room with its equipment constants, as typed.
type Bench struct {
	ID         uint64
	Label      string
	Row        int
	Column     int
	Experiment string
	Constants  map[string]Quantity
	// Members is the group's names exactly as the group entered them; the
	// only personal data fluxroom keeps.
	Members string
}

// ValidateMembers checks a group's member list as typed.
func ValidateMembers(field, m string) error {
	if utf8.RuneCountInString(m) > 200 || !utf8.ValidString(m) || strings.ContainsAny(m, "\x00\n\r") {
		return Invalid(field, "must be one line of at most 200 characters")
	}
	return nil
}

// Reading is one row of measurements from a bench, as typed.
type Reading struct {
	ID         string
	Values     map[string]Quantity
	ReceivedAt time.Time
	Sequence   uint64
	// Supersedes is the id of an earlier reading this one corrects.
	Supersedes string
}

// Superseded returns the ids of readings that a later reading corrects (nil
// when none does); read it, do not write to it.
func Superseded(rs []Reading) map[string]bool {
	var out map[string]bool
	for _, r := range rs {
		if r.Supersedes != "" {
			if out == nil {
				// Most runs have no correction: no map for them, on a path
				// taken after every reading.
				out = map[string]bool{}
			}
			out[r.Supersedes] = true
		}
	}
	return out
}

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
	// seq is the reading's number as the dashboard and station show it.
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

// siValuesOf orders converted values as the experiment declares them.
func siValuesOf(e *Experiment, m map[string]Measurement) siValues {
	out := make(siValues, 0, len(m))
	for _, s := range e.Values {
		if x, ok := m[s.Name]; ok {
			out = append(out, namedMeasurement{name: s.Name, m: x})
		}
	}
	return out
}

var experiments = map[string]*Experiment{}

func register(e *Experiment) {
	if _, dup := experiments[e.ID]; dup {
		panic("domain: experiment registered twice: " + e.ID)
	}
	experiments[e.ID] = e
}

// LookupExperiment returns the experiment with the given id.
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

// validLabel reports whether a bench label is letters and digits (any
// script), spaces, '.', '_' and '-', starting with a letter or digit. A
// loop, not a regular expression: the dashboard's build links this package,
// and regexp would be its only user there.
func validLabel(l string) bool {
	for i, r := range l {
		switch {
		case unicode.IsLetter(r) || unicode.IsNumber(r):
		case i > 0 && (r == ' ' || r == '.' || r == '_' || r == '-'):
		default:
			return false
		}
	}
	return l != ""
}

// Grid limits: a teaching lab is far smaller, so larger numbers are typing
// mistakes // common practice.
const (
	MaxGridRows    = 20
	MaxGridColumns = 20
	maxLabelLen    = 24
)

// ValidateBench checks a bench as the instructor set it and returns it with
// every missing constant filled in at its default. prefix is the bench's
// field path in the request, such as "benches[3]".
func ValidateBench(prefix string, b Bench) (Bench, error) {
	var vs violations
	if !utf8.ValidString(b.Label) || !validLabel(b.Label) || utf8.RuneCountInString(b.Label) > maxLabelLen {
		vs.add(prefix+".label", "must be 1–%d letters, digits, spaces, '.', '_' or '-', starting with a letter or digit; got %q", maxLabelLen, b.Label)
	}
	if b.Row < 0 || b.Row >= MaxGridRows {
		vs.add(prefix+".row", "must be 0–%d, got %d", MaxGridRows-1, b.Row)
	}
	if b.Column < 0 || b.Column >= MaxGridColumns {
		vs.add(prefix+".column", "must be 0–%d, got %d", MaxGridColumns-1, b.Column)
	}
	if err := ValidateMembers(prefix+".members", b.Members); err != nil {
		vs = append(vs, err.(*ValidationError).Violations...)
	}
	e, ok := LookupExperiment(b.Experiment)
	if !ok {
		vs.add(prefix+".experiment", "unknown experiment %q; use one of %s", b.Experiment, strings.Join(ExperimentIDs(), ", "))
		return b, vs.err()
	}
	out := b
	out.Constants = e.DefaultConstants()
	known := map[string]QuantitySpec{}
	for _, s := range e.Constants {
		known[s.Name] = s
	}
	for _, name := range sortedKeys(b.Constants) {
		s, ok := known[name]
		field := fmt.Sprintf("%s.constants[%q]", prefix, name)
		if !ok {
			vs.add(field, "experiment %s has no constant %q", e.ID, name)
			continue
		}
		s.check(func() string { return field }, b.Constants[name], &vs)
		out.Constants[name] = b.Constants[name]
	}
	return out, vs.err()
}

// ValidateReadingID checks a client-generated reading id.
func ValidateReadingID(field, id string) error {
	if id == "" || len(id) > 64 || !validReadingID(id) {
		return Invalid(field, "must be 1–64 characters of letters, digits, '-' or '_'; got %q", id)
	}
	return nil
}

// validReadingID reports whether an id is ASCII letters, digits, '-' and '_'.
func validReadingID(id string) bool {
	for i := 0; i < len(id); i++ {
		c := id[i]
		if !('a' <= c && c <= 'z' || 'A' <= c && c <= 'Z' || '0' <= c && c <= '9' || c == '-' || c == '_') {
			return false
		}
	}
	return id != ""
}

// ValidateReading checks one reading's values for the bench's experiment.
// prefix is the field path of the values map, such as "values".
func ValidateReading(prefix string, b Bench, values map[string]Quantity) error {
	e, ok := LookupExperiment(b.Experiment)
	if !ok {
		return Invalid("bench_id", "bench has unknown experiment %q", b.Experiment)
	}
	_, err := e.convertReading(prefix, values)
	return err
}

func (e *Experiment) convertReading(prefix string, values map[string]Quantity) (map[string]Measurement, error) {
	var vs violations
	out := make(map[string]Measurement, len(e.Values))
	for _, s := range e.Values {
		fieldOf := func() string { return fmt.Sprintf("%s[%q]", prefix, s.Name) }
		q, ok := values[s.Name]
		if !ok {
			if !s.Optional {
				vs.add(fieldOf(), "is missing: %s needs %s", e.Title, s.Label)
			}
			continue
		}
		if m, ok := s.check(fieldOf, q, &vs); ok {
			out[s.Name] = m
		}
	}
	if len(out) < len(values) || len(vs) > 0 {
		known := map[string]bool{}
		for _, s := range e.Values {
			known[s.Name] = true
		}
		for _, name := range sortedKeys(values) {
			if !known[name] {
				vs.add(fmt.Sprintf("%s[%q]", prefix, name), "experiment %s takes no value %q", e.ID, name)
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
