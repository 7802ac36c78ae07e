package readingscsv

import (
	"bytes"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/google/go-cmp/cmp"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"
)

// TestWriteThenRead: a session's readings written in the readings CSV read
// back as the same benches, constants and readings; a corrected reading is
// marked in the file and left out when it is read.
func TestWriteThenRead(t *testing.T) {
	t0 := time.Date(2026, 3, 5, 13, 30, 0, 0, time.UTC)
	var benches []domain.Bench
	readings := map[uint64][]domain.Reading{}
	for i, exp := range []string{"coil_force", "e_over_m", "straight_wire"} {
		g, err := sim.Simulate(exp, "", rand.New(rand.NewPCG(uint64(i), 7)), t0)
		if err != nil {
			t.Fatal(err)
		}
		// As the server stores a bench: every constant filled in.
		b, err := domain.ValidateBench("bench", g.Bench)
		if err != nil {
			t.Fatal(err)
		}
		b.ID, b.Label = uint64(i+1), []string{"A1", "A2", "B1"}[i]
		benches = append(benches, b)
		readings[b.ID] = g.Readings
	}
	// The coil's third reading is corrected by a later one.
	coil := readings[1]
	fix := coil[2]
	fix.ID, fix.Supersedes, fix.Sequence = "fix", coil[2].ID, 99
	readings[1] = append(coil, fix)

	var buf bytes.Buffer
	if err := Write(&buf, benches, readings); err != nil {
		t.Fatal(err)
	}
	got, errs, err := Read(&buf)
	if err != nil || len(errs) > 0 {
		t.Fatalf("Read: %v %v", err, errs)
	}
	if len(got) != len(benches) {
		t.Fatalf("read %d benches, wrote %d", len(got), len(benches))
	}
	for i, b := range got {
		want := benches[i]
		if b.Label != want.Label || b.Bench.Experiment != want.Experiment {
			t.Errorf("bench %d: %s %s, want %s %s", i, b.Label, b.Bench.Experiment, want.Label, want.Experiment)
		}
		if diff := cmp.Diff(b.Bench.Constants, want.Constants); diff != "" {
			t.Errorf("%s constants (-got +want):\n%s", b.Label, diff)
		}
		var wantValues []domain.Values
		gone := domain.Superseded(readings[want.ID])
		for _, r := range readings[want.ID] {
			if !gone[r.ID] {
				wantValues = append(wantValues, r.Values)
			}
		}
		var gotValues []domain.Values
		for _, r := range b.Readings {
			gotValues = append(gotValues, r.Values)
		}
		if diff := cmp.Diff(gotValues, wantValues); diff != "" {
			t.Errorf("%s readings (-got +want):\n%s", b.Label, diff)
		}
	}
}
