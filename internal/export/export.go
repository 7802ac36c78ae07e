// Package export turns a stored session into what leaves fluxroom after
// class: the gradebook CSV, every reading as CSV (the format `fluxroom
// analyze` reads), a JSON document, and a printable HTML report per group.
// It also parses the grading policy file. The grading itself is the
// domain's; this package only writes it down.
package export

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strings"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/readingscsv"
	"example.com/fluxroom/store"
)

// ParsePolicy reads a grading policy file (JSON, README.md "Grading
// policy"). Fields left out keep their defaults; unknown fields and bad
// values are errors naming the field.
func ParsePolicy(b []byte) (domain.Policy, error) {
	p := domain.DefaultPolicy() // a fresh copy: decoding into it changes no other
	if len(bytes.TrimSpace(b)) == 0 {
		return p, nil
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&p); err != nil {
		var te *json.UnmarshalTypeError
		var se *json.SyntaxError
		switch {
		case errors.As(err, &te):
			return p, domain.Invalid(te.Field, "must be %s, not a JSON %s", te.Type, te.Value)
		case errors.As(err, &se):
			return p, domain.Invalid("policy", "is not valid JSON at byte %d: %v", se.Offset, err)
		case strings.HasPrefix(err.Error(), "json: unknown field "):
			name := strings.Trim(strings.TrimPrefix(err.Error(), "json: unknown field "), `"`)
			return p, domain.Invalid(name, "is not a policy field; see README.md, Grading policy")
		}
		return p, domain.Invalid("policy", "%v", err)
	}
	if dec.More() {
		return p, domain.Invalid("policy", "has more than one JSON value")
	}
	return p, domain.ValidatePolicy(p)
}

// Session is a stored session prepared for export: its data, policy and
// the graded rows.
type Session struct {
	store.SessionData
	Policy domain.Policy
	Rows   []domain.GradeRow
	// Findings are the room's, as the dashboard showed them (shared
	// causes, identical readings), for the instructor; Labels names their
	// benches.
	Findings []domain.RoomFinding
	Labels   map[uint64]string
}

// Prepare grades a stored session under its policy (the default when it
// has none).
func Prepare(d store.SessionData) (Session, error) {
	p, err := ParsePolicy([]byte(d.Session.GradingPolicy))
	if err != nil {
		return Session{}, fmt.Errorf("export: the session's grading policy: %w", err)
	}
	tol := d.Session.EffectiveTolerance()
	rows := domain.GradeRoom(d.Benches, d.Readings, domain.Overrides(d.Notes), tol, p)
	results := make([]domain.BenchResult, len(rows))
	labels := make(map[uint64]string, len(rows))
	for i, r := range rows {
		results[i], labels[r.Bench.ID] = domain.ResultOf(r.Bench, r.Assessment, r.Readings), r.Bench.Label
	}
	return Session{SessionData: d, Policy: p, Rows: rows, Findings: domain.RoomFindings(results, tol), Labels: labels}, nil
}

// Format is one of the export formats.
type Format string

// Formats, as the CLI names them.
const (
	Gradebook Format = "csv"
	Readings  Format = "readings"
	JSON      Format = "json"
	HTML      Format = "html"
)

// Formats lists every format name.
var Formats = []Format{Gradebook, Readings, JSON, HTML}

// Write writes s in format f and returns the suggested file name and the
// content type.
func Write(buf *bytes.Buffer, s Session, f Format) (filename, contentType string, err error) {
	base := fmt.Sprintf("fluxroom-session-%d", s.Session.ID)
	switch f {
	case Gradebook:
		return base + "-gradebook.csv", "text/csv; charset=utf-8", WriteGradebookCSV(buf, s)
	case Readings:
		return base + "-readings.csv", "text/csv; charset=utf-8", writeReadings(buf, s)
	case JSON:
		return base + ".json", "application/json", WriteJSON(buf, s)
	case HTML:
		return base + "-report.html", "text/html; charset=utf-8", WriteHTML(buf, s)
	}
	return "", "", domain.Invalid("format", "unknown format %q; use csv, readings, json or html", f)
}

// writeReadings is the readings export: the rows' readings, in room order,
// in the readings CSV that fluxroom analyze reads back.
func writeReadings(w io.Writer, s Session) error {
	benches := make([]domain.Bench, len(s.Rows))
	readings := make(map[uint64][]domain.Reading, len(s.Rows))
	for i, row := range s.Rows {
		benches[i], readings[row.Bench.ID] = row.Bench, row.Readings
	}
	return readingscsv.Write(w, benches, readings)
}

// benchLabels names benches by their labels, in the order given.
func benchLabels(labels map[uint64]string, ids []uint64) []string {
	out := make([]string, len(ids))
	for i, id := range ids {
		out[i] = labels[id]
	}
	return out
}
