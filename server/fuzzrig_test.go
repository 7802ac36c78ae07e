package server

import (
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"sync"
	"testing"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/store"
)

// fuzzState is one server and bench shared by every fuzz input (a fresh
// file per input would make the fuzzer crawl).
type fuzzState struct {
	srv      *Server
	db       *store.DB
	sid, bid uint64
}

var (
	fuzzOnce sync.Once
	fuzzS    *fuzzState
)

func fuzzRig(t *testing.T) *fuzzState {
	fuzzOnce.Do(func() {
		dir, _ := os.MkdirTemp("", "fluxroom-fuzz-")
		db, err := store.Open(filepath.Join(dir, "f.db"), store.Options{})
		if err != nil {
			panic(err)
		}
		srv, err := New(Config{DB: db, Logger: slog.New(slog.NewTextHandler(io.Discard, nil)), AdminKey: testKey})
		if err != nil {
			panic(err)
		}
		s, _ := db.CreateSession(domain.Session{Title: "fuzz", JoinCode: "FUZZED"})
		bs, _ := db.PutBenches(s.ID, []domain.Bench{{Label: "F1", Experiment: "coil_force"}})
		fuzzS = &fuzzState{srv: srv, db: db, sid: s.ID, bid: bs[0].ID}
	})
	return fuzzS
}

func (f *fuzzState) readings(t *testing.T) []domain.Reading {
	_, rs, err := f.db.BenchReadings(f.sid, f.bid)
	if err != nil {
		t.Fatal(err)
	}
	return rs
}
