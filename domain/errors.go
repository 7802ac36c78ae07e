package domain

import (
	"fmt"
	"strings"
)

// FieldViolation says which input field is wrong and why.
type FieldViolation struct {
	// Field is the path of the field in the request, for example
	// `benches[2].constants["turns"].value`.
	Field string
	// Reason is a sentence a person can act on.
	Reason string
}

// ValidationError is bad input: one or more field violations. The server
// turns it into InvalidArgument with the violations as field details.
type ValidationError struct {
	Violations []FieldViolation
}

func (e *ValidationError) Error() string {
	parts := make([]string, len(e.Violations))
	for i, v := range e.Violations {
		parts[i] = v.Field + ": " + v.Reason
	}
	// The fields and reasons alone: this text reaches people (the CLI
	// prints it), who need no package name in front of it.
	return strings.Join(parts, "; ")
}

// Invalid returns a ValidationError with one violation.
func Invalid(field, format string, args ...any) error {
	return &ValidationError{Violations: []FieldViolation{{Field: field, Reason: fmt.Sprintf(format, args...)}}}
}

// violations collects field violations while a value is checked.
type violations []FieldViolation

func (vs *violations) add(field, format string, args ...any) {
	*vs = append(*vs, FieldViolation{Field: field, Reason: fmt.Sprintf(format, args...)})
}

func (vs violations) err() error {
	if len(vs) == 0 {
		return nil
	}
	return &ValidationError{Violations: vs}
}
