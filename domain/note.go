package domain

import (
	"strings"
	"time"
	"unicode/utf8"
)

// Note is one entry of a session's audit log: a staff member's note,
// acknowledgement or grade override on a bench, or a change of the session
// (BenchID 0 unless it concerns one bench).
type Note struct {
	BenchID uint64
	// Kind is one of the NoteKind constants.
	Kind string
	Text string
	// Author is the person who made the change, as their account names
	// them ("administrator" for the administrator's key); StaffID their
	// account, 0 for the administrator's key.
	Author  string
	StaffID uint64
	At      time.Time
	// Points and PreviousPoints belong to a grade override.
	Points, PreviousPoints float64
}

// Note kinds.
const (
	NoteKindNote          = "note"
	NoteKindAcknowledged  = "acknowledged"
	NoteKindGradeOverride = "grade_override"
	// Changes of the session, with what changed in Text.
	NoteKindBenchesSet    = "benches_set"
	NoteKindPolicySet     = "policy_set"
	NoteKindSessionEdited = "session_edited"
	NoteKindMembersSet    = "members_set"
	NoteKindClosed        = "session_closed"
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
