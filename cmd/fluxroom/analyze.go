package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"strings"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/export"
	"example.com/fluxroom/internal/readingscsv"
)

// analyzeReport is the stable JSON output of `fluxroom analyze --json`
// (documented in README.md). Fields are only ever added.
type analyzeReport struct {
	Benches  []analyzeBench       `json:"benches"`
	Findings []export.JSONFinding `json:"room_findings"`
	Errors   []readingscsv.Error  `json:"errors"`
}

type analyzeValue struct {
	Name        string  `json:"name,omitempty"`
	Value       float64 `json:"value"`
	Uncertainty float64 `json:"uncertainty"`
	Unit        string  `json:"unit"`
}

type analyzeDiagnosis struct {
	Code         string   `json:"code"`
	Level        string   `json:"level"`
	Cause        string   `json:"cause"`
	Evidence     string   `json:"evidence"`
	Action       string   `json:"action"`
	Alternatives []string `json:"alternatives"`
	// ReadingID is the reading to re-take, when the diagnosis is about one.
	ReadingID string `json:"reading_id,omitempty"`
}

type analyzeBench struct {
	Bench       string             `json:"bench"`
	Experiment  string             `json:"experiment"`
	Readings    int                `json:"readings"`
	Result      *analyzeValue      `json:"result"`
	Prediction  *analyzeValue      `json:"prediction"`
	Z           float64            `json:"z"`
	PercentDiff float64            `json:"percent_difference"`
	Verdict     string             `json:"verdict"`
	Reason      string             `json:"reason"`
	Caution     string             `json:"caution,omitempty"`
	Diagnoses   []analyzeDiagnosis `json:"diagnoses"`
	Notes       []string           `json:"notes"`
}

// analyze judges a readings CSV with the same engine as a live session.
func analyze(r io.Reader) (analyzeReport, error) {
	benches, errs, err := readingscsv.Read(r)
	if err != nil {
		return analyzeReport{}, err
	}
	rep := analyzeReport{Errors: errs, Benches: []analyzeBench{}}
	if rep.Errors == nil {
		rep.Errors = []readingscsv.Error{}
	}
	var results []domain.BenchResult
	labels := map[uint64]string{}
	for i, b := range benches {
		b.Bench.ID = uint64(i + 1)
		labels[b.Bench.ID] = b.Label
		a := domain.Assess(b.Bench, b.Readings, domain.DefaultTolerance())
		results = append(results, domain.ResultOf(b.Bench, a, b.Readings))
		ab := analyzeBench{Bench: b.Label, Experiment: b.Bench.Experiment, Readings: a.ReadingCount, Z: a.Z,
			PercentDiff: a.PercentDiff, Verdict: a.Verdict.Label(), Reason: a.Reason, Caution: a.Caution,
			Diagnoses: []analyzeDiagnosis{}, Notes: append([]string{}, a.Notes...)}
		if a.ResultUnit != "" {
			ab.Result = &analyzeValue{Name: a.ResultName, Value: a.Measured.Value, Uncertainty: a.Measured.Uncertainty, Unit: a.ResultUnit}
			ab.Prediction = &analyzeValue{Value: a.Predicted.Value, Uncertainty: a.Predicted.Uncertainty, Unit: a.ResultUnit}
		}
		for _, d := range a.Diagnoses {
			alts := d.Alternatives
			if alts == nil {
				alts = []string{}
			}
			ab.Diagnoses = append(ab.Diagnoses, analyzeDiagnosis{Code: d.Code, Level: domain.LevelOf(d.Code).String(), Cause: d.Cause,
				Evidence: d.Evidence, Action: d.Action, Alternatives: alts, ReadingID: d.ReadingID})
		}
		rep.Benches = append(rep.Benches, ab)
	}
	rep.Findings = export.JSONFindings(domain.RoomFindings(results, domain.DefaultTolerance()), labels)
	return rep, nil
}

func (m *Main) analyzeCmd(ctx context.Context, args []string) error {
	fs := m.newFlags("analyze")
	asJSON := fs.Bool("json", false, "print the stable JSON report instead of text")
	if err := parseArgs(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return usageError{"analyze: give one readings CSV file (see README.md, Readings CSV)"}
	}
	f, err := os.Open(fs.Arg(0))
	if err != nil {
		return err
	}
	defer f.Close()
	rep, err := analyze(f)
	if err != nil {
		return fmt.Errorf("%s: %w", fs.Arg(0), err)
	}
	if *asJSON {
		enc := json.NewEncoder(m.Stdout)
		enc.SetIndent("", "  ")
		if err := enc.Encode(rep); err != nil {
			return err
		}
	} else {
		printReport(m.Stdout, rep)
	}
	for _, e := range rep.Errors {
		fmt.Fprintf(m.Stderr, "%s: %s\n", fs.Arg(0), e)
	}
	if len(rep.Errors) > 0 {
		return fmt.Errorf("%d bad rows or cells in %s; the good rows were analysed", len(rep.Errors), fs.Arg(0))
	}
	return nil
}

func printReport(w io.Writer, rep analyzeReport) {
	for _, b := range rep.Benches {
		fmt.Fprintf(w, "%-6s %-13s %-10s %s\n", b.Bench, b.Experiment, b.Verdict, b.Reason)
		for _, d := range b.Diagnoses {
			fmt.Fprintf(w, "       %s [%s]: %s", d.Code, d.Level, d.Action)
			if len(d.Alternatives) > 0 {
				fmt.Fprintf(w, " (also possible: %s)", strings.Join(d.Alternatives, ", "))
			}
			fmt.Fprintln(w)
		}
		if b.Caution != "" {
			fmt.Fprintf(w, "       caution: %s\n", b.Caution)
		}
	}
	for _, f := range rep.Findings {
		fmt.Fprintf(w, "room   %s: %s\n", f.Code, f.Message)
	}
}
