package export

import (
	"encoding/json"
	"io"
	"time"

	"example.com/fluxroom/domain"
)

// The JSON export's shape (README.md, "Exports"). Fields are only added.
type jsonExport struct {
	Session struct {
		ID        uint64    `json:"id"`
		Title     string    `json:"title"`
		Course    string    `json:"course"`
		CreatedAt time.Time `json:"created_at"`
	} `json:"session"`
	Policy string      `json:"policy"`
	Groups []jsonGroup `json:"groups"`
	// RoomFindings are about the room as a whole, for the instructor.
	RoomFindings []JSONFinding `json:"room_findings"`
	// Audit is the session's audit log in order: every note,
	// acknowledgement, override and change, with the person who made it.
	Audit []jsonAudit `json:"audit"`
}

type jsonAudit struct {
	At     time.Time `json:"at"`
	Author string    `json:"author"`
	Kind   string    `json:"kind"`
	// Bench is empty for a change of the whole session.
	Bench          string  `json:"bench,omitempty"`
	Text           string  `json:"text"`
	Points         float64 `json:"points,omitempty"`
	PreviousPoints float64 `json:"previous_points,omitempty"`
}

// JSONFinding is a room finding as the JSON reports give it (the export's
// and `fluxroom analyze --json`'s), its benches by label.
type JSONFinding struct {
	Code       string   `json:"code"`
	Experiment string   `json:"experiment"`
	Message    string   `json:"message"`
	Benches    []string `json:"benches"`
}

// JSONFindings gives room findings as the JSON reports do, never null.
func JSONFindings(fs []domain.RoomFinding, labels map[uint64]string) []JSONFinding {
	out := []JSONFinding{}
	for _, f := range fs {
		out = append(out, JSONFinding{f.Code, f.Experiment, f.Message, benchLabels(labels, f.BenchIDs)})
	}
	return out
}

type jsonValue struct {
	Value       float64 `json:"value"`
	Uncertainty float64 `json:"uncertainty"`
	Unit        string  `json:"unit"`
}

type jsonGroup struct {
	Bench       string          `json:"bench"`
	Members     string          `json:"members"`
	Experiment  string          `json:"experiment"`
	ResultName  string          `json:"result_name,omitempty"`
	Result      *jsonValue      `json:"result"`
	Prediction  *jsonValue      `json:"prediction"`
	PercentDiff float64         `json:"percent_difference"`
	Z           float64         `json:"z"`
	Verdict     string          `json:"verdict"`
	Reason      string          `json:"reason"`
	Diagnoses   []jsonDiagnosis `json:"diagnoses"`
	Grade       jsonGrade       `json:"grade"`
	Feedback    []string        `json:"feedback"`
	Readings    []jsonReading   `json:"readings"`
	Notes       []jsonNote      `json:"notes"`
}

type jsonDiagnosis struct {
	Code         string   `json:"code"`
	Cause        string   `json:"cause"`
	Evidence     string   `json:"evidence"`
	Action       string   `json:"action"`
	Alternatives []string `json:"alternatives"`
	// ReadingID is the reading to re-take, when the diagnosis is about one.
	ReadingID string `json:"reading_id,omitempty"`
}

type jsonGrade struct {
	Completeness float64   `json:"completeness"`
	Accuracy     float64   `json:"accuracy"`
	Precision    float64   `json:"precision"`
	Quality      float64   `json:"data_quality"`
	Deductions   float64   `json:"deductions"`
	Computed     float64   `json:"computed"`
	Points       float64   `json:"points"`
	Max          float64   `json:"max"`
	Override     *jsonNote `json:"override,omitempty"`
}

type jsonReading struct {
	ID         string        `json:"id"`
	Sequence   uint64        `json:"sequence"`
	ReceivedAt time.Time     `json:"received_at"`
	Supersedes string        `json:"supersedes,omitempty"`
	Superseded bool          `json:"superseded"`
	Values     domain.Values `json:"values"`
}

type jsonNote struct {
	Kind           string    `json:"kind"`
	Text           string    `json:"text"`
	Author         string    `json:"author"`
	At             time.Time `json:"at"`
	Points         float64   `json:"points,omitempty"`
	PreviousPoints float64   `json:"previous_points,omitempty"`
}

// WriteJSON writes the whole graded session as one JSON document.
func WriteJSON(w io.Writer, s Session) error {
	var out jsonExport
	out.Session.ID, out.Session.Title, out.Session.Course, out.Session.CreatedAt = s.Session.ID, s.Session.Title, s.Session.Course, s.Session.CreatedAt
	out.Policy = s.Policy.Name
	out.Groups = []jsonGroup{}
	for _, r := range s.Rows {
		a, g := r.Assessment, r.Grade
		jg := jsonGroup{Bench: r.Bench.Label, Members: r.Bench.Members, Experiment: r.Bench.Experiment, ResultName: a.ResultName,
			PercentDiff: a.PercentDiff, Z: a.Z, Verdict: a.Verdict.Label(), Reason: a.Reason,
			Diagnoses: []jsonDiagnosis{}, Feedback: append([]string{}, g.Feedback...), Readings: []jsonReading{}, Notes: []jsonNote{},
			Grade: jsonGrade{Completeness: g.Completeness, Accuracy: g.Accuracy, Precision: g.Precision, Quality: g.Quality,
				Deductions: g.Deductions, Computed: g.Computed, Points: g.Final, Max: g.Max}}
		if a.ResultUnit != "" {
			jg.Result = &jsonValue{a.Measured.Value, a.Measured.Uncertainty, a.ResultUnit}
			jg.Prediction = &jsonValue{a.Predicted.Value, a.Predicted.Uncertainty, a.ResultUnit}
		}
		for _, d := range a.Diagnoses {
			alts := append([]string{}, d.Alternatives...)
			jg.Diagnoses = append(jg.Diagnoses, jsonDiagnosis{d.Code, d.Cause, d.Evidence, d.Action, alts, d.ReadingID})
		}
		if o := g.Override; o != nil {
			jg.Grade.Override = &jsonNote{Kind: domain.NoteKindGradeOverride, Text: o.Reason, Author: o.Author, At: o.At, Points: o.Points, PreviousPoints: o.Previous}
		}
		gone := domain.Superseded(r.Readings)
		for _, rd := range r.Readings {
			jg.Readings = append(jg.Readings, jsonReading{rd.ID, rd.Sequence, rd.ReceivedAt, rd.Supersedes, gone[rd.ID], rd.Values})
		}
		for _, n := range s.Notes {
			if n.BenchID == r.Bench.ID {
				jg.Notes = append(jg.Notes, jsonNote{n.Kind, n.Text, n.Author, n.At, n.Points, n.PreviousPoints})
			}
		}
		out.Groups = append(out.Groups, jg)
	}
	out.RoomFindings = JSONFindings(s.Findings, s.Labels)
	out.Audit = []jsonAudit{}
	for _, n := range s.Notes {
		out.Audit = append(out.Audit, jsonAudit{At: n.At, Author: n.Author, Kind: n.Kind, Bench: s.Labels[n.BenchID], Text: n.Text,
			Points: n.Points, PreviousPoints: n.PreviousPoints})
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(out)
}
