package domain

import (
	"strings"
	"time"
	"unicode/utf8"
)

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
