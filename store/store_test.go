package store

import (
	"errors"
	"fmt"
	"path/filepath"
	"slices"
	"sync"
	"testing"
	"time"

	"github.com/google/go-cmp/cmp"
	"go.etcd.io/bbolt"

	"example.com/fluxroom/domain"
)

func openTemp(t *testing.T) (*DB, string) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "fluxroom.db")
	db, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	return db, path
}

var t0 = time.Date(2026, 3, 4, 14, 0, 0, 0, time.UTC)

func TestRoundTripAcrossReopen(t *testing.T) {
	db, path := openTemp(t)
	s, err := db.CreateSession(domain.Session{Title: "PHY 112 section 3", JoinCode: "K7Q2MX", CreatedAt: t0})
	if err != nil {
		t.Fatal(err)
	}
	benches, err := db.PutBenches(s.ID, []domain.Bench{
		{Label: "A1", Row: 0, Column: 0, Experiment: "coil_force", Constants: map[string]domain.Quantity{"turns": {Value: 100, Unit: "1"}}},
		{Label: "A2", Row: 0, Column: 1, Experiment: "coil_force", Constants: map[string]domain.Quantity{"gap_field": {Value: 0.12, Unit: "T", Uncertainty: 0.004}}},
	})
	if err != nil {
		t.Fatal(err)
	}
	r := domain.Reading{ID: "r-1", ReceivedAt: t0.Add(time.Minute), Values: domain.ValuesOf(map[string]domain.Quantity{
		"current": {Value: 1.5, Unit: "A"}, "force": {Value: 0.72, Unit: "N"}})}
	stored, dup, err := db.AppendReading(s.ID, benches[0].ID, r)
	if err != nil || dup {
		t.Fatalf("AppendReading = %v, duplicate %v", err, dup)
	}
	if err := db.Close(); err != nil {
		t.Fatal(err)
	}

	db, err = Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if err := db.Check(); err != nil {
		t.Error(err)
	}
	gotS, err := db.SessionByJoinCode("K7Q2MX")
	if err != nil {
		t.Fatal(err)
	}
	if diff := cmp.Diff(gotS, s); diff != "" {
		t.Errorf("session after reopen (-got +want):\n%s", diff)
	}
	gotB, err := db.Benches(s.ID)
	if err != nil {
		t.Fatal(err)
	}
	if diff := cmp.Diff(gotB, benches); diff != "" {
		t.Errorf("benches after reopen (-got +want):\n%s", diff)
	}
	_, rs, err := db.BenchReadings(s.ID, benches[0].ID)
	if err != nil {
		t.Fatal(err)
	}
	if diff := cmp.Diff(rs, []domain.Reading{stored}); diff != "" {
		t.Errorf("readings after reopen (-got +want):\n%s", diff)
	}
}

func TestAppendReadingIsIdempotent(t *testing.T) {
	db, path := openTemp(t)
	s, _ := db.CreateSession(domain.Session{Title: "t", JoinCode: "AAAAAA"})
	bs, err := db.PutBenches(s.ID, []domain.Bench{{Label: "A1", Experiment: "coil_force"}})
	if err != nil {
		t.Fatal(err)
	}
	r := domain.Reading{ID: "same", Values: domain.ValuesOf(map[string]domain.Quantity{"current": {Value: 1, Unit: "A"}})}
	first, _, err := db.AppendReading(s.ID, bs[0].ID, r)
	if err != nil {
		t.Fatal(err)
	}
	// A retry with other values never overwrites what was stored.
	r.Values = domain.ValuesOf(map[string]domain.Quantity{"current": {Value: 2, Unit: "A"}})
	again, dup, err := db.AppendReading(s.ID, bs[0].ID, r)
	if err != nil {
		t.Fatal(err)
	}
	if !dup {
		t.Error("second append: duplicate = false, want true")
	}
	if diff := cmp.Diff(again, first); diff != "" {
		t.Errorf("retry returned (-got +want):\n%s", diff)
	}
	// The ids are known from the readings themselves: after a restart too,
	// and for the other benches of the session, which have none yet.
	if err := db.Close(); err != nil {
		t.Fatal(err)
	}
	if db, err = Open(path, Options{}); err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if _, dup, err := db.AppendReading(s.ID, bs[0].ID, r); err != nil || !dup {
		t.Errorf("append after reopening: duplicate %v, %v; want a duplicate", dup, err)
	}
	other, _ := db.PutBenches(s.ID, []domain.Bench{{Label: "A1", Experiment: "coil_force"}, {Label: "A2", Experiment: "coil_force"}})
	for _, b := range other {
		if b.Label == "A2" {
			if _, dup, err := db.AppendReading(s.ID, b.ID, r); err != nil || dup {
				t.Errorf("the same id on another bench: duplicate %v, %v; want stored", dup, err)
			}
		}
	}
	_, rs, _ := db.BenchReadings(s.ID, bs[0].ID)
	if len(rs) != 1 {
		t.Errorf("stored %d readings, want 1", len(rs))
	}
}

func TestErrors(t *testing.T) {
	db, _ := openTemp(t)
	defer db.Close()
	s, _ := db.CreateSession(domain.Session{Title: "t", JoinCode: "BBBBBB"})
	bs, _ := db.PutBenches(s.ID, []domain.Bench{{Label: "A1", Experiment: "coil_force"}})
	for _, tc := range []struct {
		name string
		err  func() error
		want error
	}{
		{"join code taken", func() error {
			_, err := db.CreateSession(domain.Session{Title: "u", JoinCode: "BBBBBB"})
			return err
		}, ErrConflict},
		{"duplicate label", func() error {
			_, err := db.PutBenches(s.ID, []domain.Bench{{Label: "A1", Experiment: "coil_force"}})
			return err
		}, ErrConflict},
		{"unknown session", func() error { _, err := db.Benches(99); return err }, ErrNotFound},
		{"unknown bench id on update", func() error {
			_, err := db.PutBenches(s.ID, []domain.Bench{{ID: 999, Label: "Z9", Experiment: "coil_force"}})
			return err
		}, ErrNotFound},
		{"reading for unknown bench", func() error {
			_, _, err := db.AppendReading(s.ID, bs[0].ID+100, domain.Reading{ID: "x"})
			return err
		}, ErrNotFound},
		{"unknown join code", func() error { _, err := db.SessionByJoinCode("ZZZZZZ"); return err }, ErrNotFound},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if err := tc.err(); !errors.Is(err, tc.want) {
				t.Errorf("got %v, want %v", err, tc.want)
			}
		})
	}
	// Failed writes left nothing behind.
	got, _ := db.Benches(s.ID)
	if len(got) != 1 {
		t.Errorf("after failed writes the session has %d benches, want 1", len(got))
	}
}

func TestNewerSchemaRefusesToOpen(t *testing.T) {
	db, path := openTemp(t)
	if err := db.bolt.Update(func(tx *bbolt.Tx) error {
		return tx.Bucket(bucketMeta).Put(keySchemaVersion, u64(SchemaVersion+1))
	}); err != nil {
		t.Fatal(err)
	}
	db.Close()
	if _, err := Open(path, Options{}); !errors.Is(err, ErrSchema) {
		t.Errorf("Open = %v, want ErrSchema", err)
	}
}

func TestLockedFileFailsFast(t *testing.T) {
	db, path := openTemp(t)
	defer db.Close()
	for _, ro := range []bool{false, true} {
		if _, err := Open(path, Options{Timeout: 50 * time.Millisecond, ReadOnly: ro}); !errors.Is(err, ErrLocked) {
			t.Errorf("second Open (read-only %v) of a locked file: %v, want ErrLocked", ro, err)
		}
	}
}

func TestSessionUpdateAndNotesSurviveReopen(t *testing.T) {
	db, path := openTemp(t)
	s, _ := db.CreateSession(domain.Session{Title: "t", JoinCode: "CCCCCC", CreatedAt: t0})
	bs, _ := db.PutBenches(s.ID, []domain.Bench{{Label: "A1", Experiment: "coil_force"}})
	tol := domain.Tolerance{ZConsistent: 1.5, ZOff: 2.5, GoodPercent: 3, AcceptablePercent: 8}
	if _, err := db.UpdateSession(domain.Session{ID: s.ID, Title: "renamed", Tolerance: tol, StationsSeeVerdicts: true}); err != nil {
		t.Fatal(err)
	}
	note := domain.Note{BenchID: bs[0].ID, Kind: domain.NoteKindNote, Text: "re-zeroed at 14:10", Author: "TA", At: t0.Add(time.Hour)}
	if err := db.AppendNote(s.ID, note); err != nil {
		t.Fatal(err)
	}
	if err := db.AppendNote(s.ID, domain.Note{BenchID: 999, Kind: domain.NoteKindNote, Text: "x"}); !errors.Is(err, ErrNotFound) {
		t.Errorf("note on an unknown bench: %v, want ErrNotFound", err)
	}
	db.Close()
	db, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	got, _ := db.Session(s.ID)
	want := s
	want.Title, want.Tolerance, want.StationsSeeVerdicts = "renamed", tol, true
	if diff := cmp.Diff(got, want); diff != "" {
		t.Errorf("session (-got +want):\n%s", diff)
	}
	notes, _ := db.Notes(s.ID)
	if diff := cmp.Diff(notes, []domain.Note{note}); diff != "" {
		t.Errorf("notes (-got +want):\n%s", diff)
	}
	if err := db.Check(); err != nil {
		t.Error(err)
	}
}

// TestGroupCommit: many concurrent appends share commits, each gets its own
// answer, duplicates within one group are caught, and an append after
// Close is an error, not a panic.
func TestGroupCommit(t *testing.T) {
	db, path := openTemp(t)
	s, _ := db.CreateSession(domain.Session{Title: "g", JoinCode: "GGGGGG"})
	bs, _ := db.PutBenches(s.ID, []domain.Bench{{Label: "A1", Experiment: "coil_force"}, {Label: "A2", Experiment: "coil_force"}})
	var wg sync.WaitGroup
	var mu sync.Mutex
	dups, errs := 0, 0
	for i := 0; i < 400; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			b := bs[i%2].ID
			id := fmt.Sprintf("r%d", i/2%100) // each id twice per bench
			_, dup, err := db.AppendReading(s.ID, b, domain.Reading{ID: id, Values: domain.ValuesOf(map[string]domain.Quantity{"current": {Value: 1, Unit: "A"}})})
			if i%50 == 0 {
				_, _, err2 := db.AppendReading(s.ID, 9999, domain.Reading{ID: "x"})
				if !errors.Is(err2, ErrNotFound) {
					t.Errorf("append to a missing bench: %v", err2)
				}
			}
			mu.Lock()
			defer mu.Unlock()
			if dup {
				dups++
			}
			if err != nil {
				errs++
			}
		}()
	}
	wg.Wait()
	if dups != 200 || errs != 0 {
		t.Errorf("%d duplicates, %d errors; want 200 and 0", dups, errs)
	}
	db.Close()
	if _, _, err := db.AppendReading(s.ID, bs[0].ID, domain.Reading{ID: "late"}); err == nil {
		t.Error("append after Close succeeded")
	}
	db, _ = Open(path, Options{})
	defer db.Close()
	for _, b := range bs {
		_, rs, _ := db.BenchReadings(s.ID, b.ID)
		if len(rs) != 100 {
			t.Errorf("bench %d has %d readings, want 100", b.ID, len(rs))
		}
	}
	if err := db.Check(); err != nil {
		t.Error(err)
	}
}

// BareBaselines measures all three of its baselines in a directory of its
// own: commits back to back and after a pause, each timed and sorted, and a
// group commit's rate.
func TestBareBaselines(t *testing.T) {
	b, err := BareBaselines(t.TempDir(), 200*time.Millisecond, time.Millisecond)
	if err != nil {
		t.Fatal(err)
	}
	if b.Single <= 0 || b.Group <= 0 || len(b.Commits) == 0 || len(b.Paused) != 100 {
		t.Fatalf("single %v/s in %d commits, group %v/s, %d paused commits; want all measured and 100 paused (100 ms of 1 ms pauses)", b.Single, len(b.Commits), b.Group, len(b.Paused))
	}
	if !slices.IsSorted(b.Commits) || !slices.IsSorted(b.Paused) || b.Paused[0] <= 0 {
		t.Error("commit times are not sorted, or a paused commit took no time")
	}
	for _, tc := range []struct {
		dur, pause time.Duration
		want       int
	}{{5 * time.Second, time.Millisecond, 200}, {400 * time.Millisecond, 5 * time.Millisecond, 40}, {time.Second, time.Second, 20}, {time.Second, 0, 200}} {
		if got := pausedCommits(tc.dur, tc.pause); got != tc.want {
			t.Errorf("pausedCommits(%v, %v) = %d, want %d", tc.dur, tc.pause, got, tc.want)
		}
	}
}
