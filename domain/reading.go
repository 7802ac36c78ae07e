package domain

import "time"

// Reading is one row of measurements from a bench, as typed.
type Reading struct {
	ID         string
	Values     Values
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
func ValidateReading(prefix string, b Bench, values Values) error {
	e, ok := LookupExperiment(b.Experiment)
	if !ok {
		return Invalid("bench_id", "bench has unknown experiment %q", b.Experiment)
	}
	_, err := e.convertReading(prefix, values)
	return err
}
