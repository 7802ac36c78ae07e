package export

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"

	"example.com/fluxroom/domain"
)

// GradebookHeader is the gradebook CSV's header: plain words, units where
// a column has one.
var GradebookHeader = []string{
	"bench", "group members", "experiment", "result", "result value", "result uncertainty", "unit",
	"prediction", "prediction uncertainty", "percent difference", "z", "verdict", "readings counted",
	"completeness points", "accuracy points", "precision points", "data quality points", "deduction points",
	"computed points", "points", "max points", "diagnosis codes", "override reason", "override by", "override at",
}

func newCSV(w io.Writer) *csv.Writer {
	cw := csv.NewWriter(w)
	cw.UseCRLF = true // RFC 4180
	return cw
}

func pts(v float64) string { return strconv.FormatFloat(math.Round(v*100)/100, 'f', -1, 64) }

// WriteGradebookCSV writes one row per group and experiment (RFC 4180,
// UTF-8). Numbers are rounded to match their uncertainty.
func WriteGradebookCSV(w io.Writer, s Session) error {
	cw := newCSV(w)
	cw.Write(GradebookHeader)
	if err := gradebookRows(cw, s, nil); err != nil {
		return err
	}
	cw.Flush()
	return cw.Error()
}

// WriteTermGradebookCSV writes the gradebooks of many sessions as one file,
// with the session's id and title in front of each row.
func WriteTermGradebookCSV(w io.Writer, sessions func(yield func(Session, error) bool)) error {
	cw := newCSV(w)
	cw.Write(append([]string{"session", "session title"}, GradebookHeader...))
	var err error
	sessions(func(s Session, serr error) bool {
		if serr != nil {
			err = serr
			return false
		}
		err = gradebookRows(cw, s, []string{strconv.FormatUint(s.Session.ID, 10), s.Session.Title})
		return err == nil
	})
	if err != nil {
		return err
	}
	cw.Flush()
	return cw.Error()
}

func gradebookRows(cw *csv.Writer, s Session, prefix []string) error {
	for _, r := range s.Rows {
		a, g := r.Assessment, r.Grade
		var value, uv, pred, up, pct, z string
		if a.ResultUnit != "" {
			value, uv = domain.RoundToUncertainty(a.Measured.Value, a.Measured.Uncertainty)
			pred, up = domain.RoundToUncertainty(a.Predicted.Value, a.Predicted.Uncertainty)
			pct, z = fmt.Sprintf("%.1f", a.PercentDiff), fmt.Sprintf("%.1f", a.Z)
		}
		var codes []string
		for _, d := range a.Diagnoses {
			codes = append(codes, d.Code)
		}
		rec := []string{r.Bench.Label, r.Bench.Members, r.Bench.Experiment, a.ResultName, value, uv, a.ResultUnit,
			pred, up, pct, z, a.Verdict.Label(), strconv.Itoa(a.ReadingCount),
			pts(g.Completeness), pts(g.Accuracy), pts(g.Precision), pts(g.Quality), pts(g.Deductions),
			pts(g.Computed), pts(g.Final), pts(g.Max), strings.Join(codes, " "), "", "", ""}
		if o := g.Override; o != nil {
			rec[22], rec[23], rec[24] = o.Reason, o.Author, o.At.UTC().Format(time.RFC3339)
		}
		if err := cw.Write(append(append([]string(nil), prefix...), rec...)); err != nil {
			return err
		}
	}
	return nil
}
