package store

import (
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"example.com/fluxroom/domain"
)

// BenchmarkAppendReading measures durable appends from many stations at
// once, as the server makes them: every call waits for its commit. It
// reports readings per second and the file's bytes per reading.
func BenchmarkAppendReading(b *testing.B) {
	for _, stations := range []int{1, 32, 512} {
		b.Run(fmt.Sprintf("stations=%d", stations), func(b *testing.B) {
			path := filepath.Join(b.TempDir(), "bench.db")
			db, err := Open(path, Options{})
			if err != nil {
				b.Fatal(err)
			}
			defer db.Close()
			var benchIDs, sessionIDs []uint64
			for len(benchIDs) < stations {
				s, err := db.CreateSession(domain.Session{Title: "bench", JoinCode: fmt.Sprintf("J%05d", len(benchIDs))})
				if err != nil {
					b.Fatal(err)
				}
				var bs []domain.Bench
				for i := 0; i < 30 && len(benchIDs)+len(bs) < stations; i++ {
					bs = append(bs, domain.Bench{Label: fmt.Sprintf("S%d", i), Experiment: "coil_force"})
				}
				stored, err := db.PutBenches(s.ID, bs)
				if err != nil {
					b.Fatal(err)
				}
				for _, x := range stored {
					benchIDs, sessionIDs = append(benchIDs, x.ID), append(sessionIDs, s.ID)
				}
			}
			var n atomic.Int64
			b.ReportAllocs()
			b.ResetTimer()
			var wg sync.WaitGroup
			per := (b.N + stations - 1) / stations
			for i := 0; i < stations; i++ {
				wg.Add(1)
				go func() {
					defer wg.Done()
					for k := 0; k < per; k++ {
						r := domain.Reading{ID: "r" + strconv.Itoa(k), Values: domain.ValuesOf(map[string]domain.Quantity{
							"current": {Value: float64(k%9) * 0.5, Unit: "A"}, "force": {Value: 0.24 * float64(k%9), Unit: "N"}})}
						if _, _, err := db.AppendReading(sessionIDs[i], benchIDs[i], r); err != nil {
							b.Error(err)
							return
						}
						n.Add(1)
					}
				}()
			}
			wg.Wait()
			b.StopTimer()
			b.ReportMetric(float64(n.Load())/b.Elapsed().Seconds(), "readings/s")
			if fi, err := os.Stat(path); err == nil {
				b.ReportMetric(float64(fi.Size())/float64(n.Load()), "file-B/reading")
			}
			if used, err := db.UsedBytes(); err == nil {
				b.ReportMetric(float64(used)/float64(n.Load()), "used-B/reading")
			}
		})
	}
}

// BenchmarkBareCommitAfterPause times a bare bbolt commit (one 100-byte
// record, as BareBaselines') after a pause of each length: the load
// program's baseline commits back to back, while at 1 000 readings/s a
// server's commits come about a millisecond apart, and a disk's sync after
// a pause is slower. It reports the commits' p50 in µs.
func BenchmarkBareCommitAfterPause(b *testing.B) {
	for _, pause := range []time.Duration{0, time.Millisecond, 5 * time.Millisecond} {
		b.Run(fmt.Sprintf("pause=%v", pause), func(b *testing.B) {
			db, put, err := openBare(filepath.Join(b.TempDir(), "bare.db"))
			if err != nil {
				b.Fatal(err)
			}
			defer db.Close()
			took := make([]time.Duration, 0, b.N)
			b.ResetTimer()
			for range b.N {
				if pause > 0 {
					time.Sleep(pause)
				}
				t0 := time.Now()
				if err := db.Update(put); err != nil {
					b.Fatal(err)
				}
				took = append(took, time.Since(t0))
			}
			slices.Sort(took)
			b.ReportMetric(float64(took[len(took)/2].Microseconds()), "p50-µs")
		})
	}
}
