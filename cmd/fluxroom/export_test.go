package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"
	"example.com/fluxroom/internal/export"
	"example.com/fluxroom/store"
)

// TestExportRoundTrip writes a session's readings with `fluxroom export
// --format readings` and judges the file with `fluxroom analyze`: every
// bench gets the same verdict and diagnoses as the stored session.
func TestExportRoundTrip(t *testing.T) {
	dbPath := filepath.Join(t.TempDir(), "f.db")
	db, err := store.Open(dbPath, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, _ := db.CreateSession(domain.Session{Title: "round trip", JoinCode: "RTRTRT", CreatedAt: time.Date(2026, 3, 5, 9, 0, 0, 0, time.UTC)})
	i := 0
	for _, exp := range sim.Experiments() {
		for _, mistake := range []string{"", sim.Mistakes(exp)[0]} {
			g, _ := sim.Simulate(exp, mistake, rand.New(rand.NewPCG(5, uint64(i))), time.Date(2026, 3, 5, 9, 0, 0, 0, time.UTC))
			g.Bench.Label, g.Bench.Row, g.Bench.Column = string(rune('A'+i/5))+string(rune('1'+i%5)), i/5, i%5
			bs, err := db.PutBenches(s.ID, []domain.Bench{g.Bench})
			if err != nil {
				t.Fatal(err)
			}
			for _, r := range g.Readings {
				r.ID = g.Bench.Label + "-" + r.ID
				db.AppendReading(s.ID, bs[len(bs)-1].ID, r)
			}
			i++
		}
	}
	d, _ := db.ReadSession(s.ID)
	want, err := export.Prepare(d)
	if err != nil {
		t.Fatal(err)
	}
	db.Close()

	out := filepath.Join(t.TempDir(), "readings.csv")
	if err := NewMain(io.Discard, io.Discard).Run(context.Background(), []string{"export", "--db", dbPath, "--session", "1", "--format", "readings", "--out", out}); err != nil {
		t.Fatal(err)
	}
	f, _ := os.Open(out)
	rep, err := analyze(f)
	f.Close()
	if err != nil || len(rep.Errors) > 0 {
		t.Fatalf("analyze of the export: %v %v", err, rep.Errors)
	}
	got := map[string]analyzeBench{}
	for _, b := range rep.Benches {
		got[b.Bench] = b
	}
	for _, r := range want.Rows {
		g := got[r.Bench.Label]
		var codes []string
		for _, d := range g.Diagnoses {
			codes = append(codes, d.Code)
		}
		var wantCodes []string
		for _, d := range r.Assessment.Diagnoses {
			wantCodes = append(wantCodes, d.Code)
		}
		if g.Verdict != r.Assessment.Verdict.Label() || strings.Join(codes, ",") != strings.Join(wantCodes, ",") {
			t.Errorf("%s: analyze says %s %v, the session %s %v", r.Bench.Label, g.Verdict, codes, r.Assessment.Verdict.Label(), wantCodes)
		}
	}

	// The gradebook goes to standard output and parses as CSV.
	var buf bytes.Buffer
	if err := NewMain(&buf, io.Discard).Run(context.Background(), []string{"export", "--db", dbPath, "--session", "1"}); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&buf).ReadAll()
	if err != nil || len(recs) != 11 {
		t.Errorf("gradebook: %d records, %v; want a header and 10 rows", len(recs), err)
	}
	// A bad policy file is an error naming the field, and a non-zero exit.
	bad := filepath.Join(t.TempDir(), "policy.json")
	os.WriteFile(bad, []byte(`{"points": {"accuracy": -4}}`), 0o644)
	err = NewMain(io.Discard, io.Discard).Run(context.Background(), []string{"export", "--db", dbPath, "--session", "1", "--policy", bad})
	if err == nil || !strings.Contains(err.Error(), "points.accuracy") {
		t.Errorf("bad policy: %v, want an error naming points.accuracy", err)
	}
}
