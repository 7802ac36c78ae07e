package domain

import (
	"fmt"
	"strings"
	"unicode"
	"unicode/utf8"
)

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
