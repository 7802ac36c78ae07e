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

// BareBaselines measures bare bbolt in dir for dur, the baseline the load
// program compares the store's commits with: 100-byte records appended to a
// file of their own, one Update each (single, a second, with each commit's
// time), then one writer committing everything 512 goroutines queued while
// the previous commit ran (group, a second): the store's scheme, without the
// store. It lives here because only the store imports bbolt.
func BareBaselines(dir string, dur time.Duration) (single, group float64, commits []time.Duration, err error) {
	db, err := bbolt.Open(filepath.Join(dir, "baseline.db"), 0o600, nil)
	if err != nil {
		return 0, 0, nil, err
	}
	defer db.Close()
	if err := db.Update(func(tx *bbolt.Tx) error { _, err := tx.CreateBucketIfNotExists([]byte("r")); return err }); err != nil {
		return 0, 0, nil, err
	}
	val := make([]byte, 100)
	put := func(tx *bbolt.Tx) error {
		b := tx.Bucket([]byte("r"))
		seq, _ := b.NextSequence()
		return b.Put(baselineKey(seq), val)
	}
	end := time.Now().Add(dur / 2)
	n := 0
	for time.Now().Before(end) {
		t0 := time.Now()
		if err := db.Update(put); err != nil {
			return 0, 0, nil, err
		}
		commits = append(commits, time.Since(t0))
		n++
	}
	single = float64(n) / (dur / 2).Seconds()
	slices.Sort(commits)

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
	return single, float64(m.Load()) / (dur / 2).Seconds(), commits, nil
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
