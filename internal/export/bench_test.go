package export

import (
	"fmt"
	"io"
	"math/rand/v2"
	"path/filepath"
	"runtime"
	"sync"
	"testing"
	"time"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"
	"example.com/fluxroom/store"
)

// A term: 100 sessions of 30 stations × 5 experiments (150 bench runs) with
// 20 readings each, 300 000 readings in all.
const (
	termSessions = 100
	termBenches  = 150
	termReadings = 20
)

// termDB builds the term's bbolt file once, one transaction per session.
func termDB(b *testing.B) *store.DB {
	b.Helper()
	dir := b.TempDir()
	db, err := store.Open(filepath.Join(dir, "term.db"), store.Options{})
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { db.Close() })
	exps := sim.Experiments()
	t0 := time.Date(2026, 1, 12, 9, 0, 0, 0, time.UTC)
	for s := 0; s < termSessions; s++ {
		d := store.SessionData{Session: domain.Session{Title: fmt.Sprintf("PHY 142 week %d", s), JoinCode: fmt.Sprintf("T%05d", s), CreatedAt: t0},
			Readings: map[uint64][]domain.Reading{}}
		for i := 0; i < termBenches; i++ {
			exp := exps[i%len(exps)]
			g, _ := sim.Simulate(exp, "", rand.New(rand.NewPCG(uint64(s), uint64(i))), t0)
			bench := g.Bench
			bench.ID, bench.Label, bench.Row, bench.Column = uint64(i+1), fmt.Sprintf("S%02d-%d", i/5, i%5), i/10, i%10
			d.Benches = append(d.Benches, bench)
			var rs []domain.Reading
			for k := 0; k < termReadings; k++ {
				r := g.Readings[k%len(g.Readings)]
				r.ID = fmt.Sprintf("r%d", k)
				rs = append(rs, r)
			}
			d.Readings[bench.ID] = rs
		}
		if _, err := db.ImportSession(d); err != nil {
			b.Fatal(err)
		}
	}
	return db
}

var (
	termOnce sync.Once
	termData *store.DB
)

// peakHeap samples the heap in use until stop is closed.
func peakHeap(stop <-chan struct{}) <-chan uint64 {
	out := make(chan uint64, 1)
	go func() {
		var peak uint64
		var ms runtime.MemStats
		t := time.NewTicker(5 * time.Millisecond)
		defer t.Stop()
		for {
			runtime.ReadMemStats(&ms)
			peak = max(peak, ms.HeapInuse)
			select {
			case <-stop:
				out <- peak
				return
			case <-t.C:
			}
		}
	}()
	return out
}

// BenchmarkExportTerm grades and writes a whole term's gradebook and every
// reading, reporting seconds and peak heap against the targets (3 s, 200 MB):
//
//	go test -run '^$' -bench ExportTerm -benchtime 1x ./internal/export/
func BenchmarkExportTerm(b *testing.B) {
	termOnce.Do(func() { termData = termDB(b) })
	db := termData
	sessions, err := db.Sessions()
	if err != nil {
		b.Fatal(err)
	}
	runtime.GC()
	b.ResetTimer()
	stop := make(chan struct{})
	peak := peakHeap(stop)
	start := time.Now()
	for i := 0; i < b.N; i++ {
		// Each session is read and graded once, and written to both files.
		each := func(yield func(Session, error) bool) {
			for _, s := range sessions {
				d, err := db.ReadSession(s.ID)
				if err != nil {
					yield(Session{}, err)
					return
				}
				ex, err := Prepare(d)
				if err == nil {
					err = writeReadings(io.Discard, ex)
				}
				if !yield(ex, err) {
					return
				}
			}
		}
		if err := WriteTermGradebookCSV(io.Discard, each); err != nil {
			b.Fatal(err)
		}
	}
	elapsed := time.Since(start).Seconds() / float64(b.N)
	close(stop)
	p := <-peak
	b.ReportMetric(elapsed, "s/term")
	b.ReportMetric(elapsed/3, "ratio-to-3s")
	b.ReportMetric(float64(p)/1e6, "MB-peak-heap")
	b.ReportMetric(float64(p)/200e6, "ratio-to-200MB")
	b.ReportMetric(float64(termSessions*termBenches*termReadings), "readings")
}
