package store

import (
	"context"
	"path/filepath"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"go.etcd.io/bbolt"
)

// BareBaseline is what BareBaselines measured.
type BareBaseline struct {
	// Single is appends a second with one Update each, back to back;
	// Commits each one's time, sorted.
	Single  float64
	Commits []time.Duration
	// Paused are commits each after a pause (a quiet server's spacing, when
	// a disk syncs more slowly than back to back), sorted.
	Paused []time.Duration
	// Group is appends a second with one writer committing everything 512
	// goroutines queued while the previous commit ran.
	Group float64
}

// BareBaselines measures bare bbolt in dir for about dur, the baseline the
// load program compares the store's commits with: 100-byte records appended
// to a file of their own, one Update each (back to back for dur/2, then
// pausedCommits each after pause), then one writer committing everything 512 goroutines
// queued while the previous commit ran (for dur/2): the store's scheme,
// without the store. It lives here because only the store imports bbolt.
func BareBaselines(dir string, dur, pause time.Duration) (BareBaseline, error) {
	var out BareBaseline
	db, put, err := openBare(filepath.Join(dir, "baseline.db"))
	if err != nil {
		return out, err
	}
	defer db.Close()
	end := time.Now().Add(dur / 2)
	for time.Now().Before(end) {
		t0 := time.Now()
		if err := db.Update(put); err != nil {
			return out, err
		}
		out.Commits = append(out.Commits, time.Since(t0))
	}
	out.Single = float64(len(out.Commits)) / (dur / 2).Seconds()
	slices.Sort(out.Commits)
	for range pausedCommits(dur, pause) {
		time.Sleep(pause)
		t0 := time.Now()
		if err := db.Update(put); err != nil {
			return out, err
		}
		out.Paused = append(out.Paused, time.Since(t0))
	}
	slices.Sort(out.Paused)

	queue := make(chan chan error, 512)
	go func() {
		for first := range queue {
			batch := []chan error{first}
		drain:
			for len(batch) < 512 {
				select {
				case d := <-queue:
					batch = append(batch, d)
				default:
					break drain
				}
			}
			err := db.Update(func(tx *bbolt.Tx) error {
				for range batch {
					if err := put(tx); err != nil {
						return err
					}
				}
				return nil
			})
			for _, d := range batch {
				d <- err
			}
		}
	}()
	defer close(queue)
	var m atomic.Int64
	ctx, cancel := context.WithTimeout(context.Background(), dur/2)
	defer cancel()
	var wg sync.WaitGroup
	for i := 0; i < 512; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			done := make(chan error, 1)
			for ctx.Err() == nil {
				queue <- done
				if <-done == nil {
					m.Add(1)
				}
			}
		}()
	}
	wg.Wait()
	out.Group = float64(m.Load()) / (dur / 2).Seconds()
	return out, nil
}

// pausedCommits is how many commits BareBaselines times after a pause: as
// many as dur/2 holds, from 20 to 200.
func pausedCommits(dur, pause time.Duration) int {
	return min(200, max(20, int(dur/2/max(pause, time.Microsecond))))
}

// openBare opens a bare bbolt file with one bucket, and put, the
// transaction that appends one 100-byte record to it.
func openBare(path string) (*bbolt.DB, func(*bbolt.Tx) error, error) {
	db, err := bbolt.Open(path, 0o600, nil)
	if err != nil {
		return nil, nil, err
	}
	if err := db.Update(func(tx *bbolt.Tx) error { _, err := tx.CreateBucketIfNotExists([]byte("r")); return err }); err != nil {
		db.Close()
		return nil, nil, err
	}
	val := make([]byte, 100)
	put := func(tx *bbolt.Tx) error {
		b := tx.Bucket([]byte("r"))
		seq, _ := b.NextSequence()
		return b.Put(baselineKey(seq), val)
	}
	return db, put, nil
}

// baselineKey is a record key of the baseline file.
func baselineKey(v uint64) []byte {
	b := make([]byte, 8)
	for i := 7; i >= 0; i-- {
		b[i] = byte(v)
		v >>= 8
	}
	return b
}
