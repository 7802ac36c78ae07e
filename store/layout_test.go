package store

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"sync"
	"testing"

	"go.etcd.io/bbolt"

	"example.com/fluxroom/domain"
)

// copyFixture copies a file from testdata to a temp dir: opening upgrades
// it in place.
func copyFixture(t *testing.T, name string) string {
	t.Helper()
	src, err := os.Open(filepath.Join("..", "testdata", "store", name))
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	path := filepath.Join(t.TempDir(), name)
	dst, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := io.Copy(dst, src); err != nil {
		t.Fatal(err)
	}
	if err := dst.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

func schemaOf(t *testing.T, path string) (version uint64, hasV1Readings bool) {
	t.Helper()
	b, err := bbolt.Open(path, 0o600, &bbolt.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer b.Close()
	b.View(func(tx *bbolt.Tx) error {
		version, _ = decodeU64(tx.Bucket(bucketMeta).Get(keySchemaVersion))
		hasV1Readings = tx.Bucket(bucketReadingsV1) != nil || tx.Bucket(bucketReadingIDsV1) != nil
		return nil
	})
	return version, hasV1Readings
}

// testdata/store/schema-v1.db was written by fluxroom at schema 1 (two
// sessions of two benches, six readings each, interleaved, and a note).
func TestUpgradeFromSchema1(t *testing.T) {
	path := copyFixture(t, "schema-v1.db")
	if v, old := schemaOf(t, path); v != 1 || !old {
		t.Fatalf("fixture: schema %d, v1 readings bucket %v; want 1, true", v, old)
	}
	for round := 0; round < 2; round++ { // the second open finds nothing to do
		db, err := Open(path, Options{})
		if err != nil {
			t.Fatal(err)
		}
		if err := db.Check(); err != nil {
			t.Error(err)
		}
		ss, err := db.Sessions()
		if err != nil || len(ss) != 2 {
			t.Fatalf("sessions = %d, %v; want 2", len(ss), err)
		}
		for _, s := range ss {
			d, err := db.ReadSession(s.ID)
			if err != nil {
				t.Fatal(err)
			}
			if len(d.Benches) != 2 || len(d.Notes) != 1 {
				t.Errorf("session %d: %d benches, %d notes; want 2, 1", s.ID, len(d.Benches), len(d.Notes))
			}
			for _, b := range d.Benches {
				rs := d.Readings[b.ID]
				if len(rs) != 6 {
					t.Fatalf("session %d bench %s: %d readings, want 6", s.ID, b.Label, len(rs))
				}
				for k, r := range rs {
					if want := "r" + string(rune('a'+k)); r.ID != want || r.Values.At("current").Value != 0.5+0.5*float64(k) {
						t.Errorf("session %d bench %s reading %d = %s, %v; want %s at %.1f A", s.ID, b.Label, k, r.ID, r.Values.At("current").Value, want, 0.5+0.5*float64(k))
					}
				}
			}
			// The id index still finds the moved readings.
			_, dup, err := db.AppendReading(s.ID, d.Benches[0].ID, domain.Reading{ID: "rc", Values: domain.ValuesOf(map[string]domain.Quantity{"current": {Value: 9, Unit: "A"}})})
			if err != nil || !dup {
				t.Errorf("resending reading rc: duplicate %v, %v; want a duplicate", dup, err)
			}
		}
		if err := db.Close(); err != nil {
			t.Fatal(err)
		}
		if v, old := schemaOf(t, path); v != SchemaVersion || old {
			t.Errorf("after open: schema %d, v1 readings bucket %v; want %d, false", v, old, SchemaVersion)
		}
	}
}

// A file the upgrade cannot read is refused and left exactly as it was.
func TestFailedUpgradeChangesNothing(t *testing.T) {
	path := copyFixture(t, "schema-v1.db")
	b, err := bbolt.Open(path, 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	b.Update(func(tx *bbolt.Tx) error { return tx.Bucket(bucketReadingsV1).Put([]byte("short key"), []byte("x")) })
	b.Close()
	before, _ := os.ReadFile(path)
	if db, err := Open(path, Options{}); err == nil {
		db.Close()
		t.Fatal("Open upgraded a file with a corrupt reading key")
	}
	after, _ := os.ReadFile(path)
	if v, old := schemaOf(t, path); v != 1 || !old || string(before) != string(after) {
		t.Errorf("after the failed upgrade: schema %d, v1 bucket %v, file unchanged %v; want 1, true, true", v, old, string(before) == string(after))
	}
}

// Readings from many benches at once, interleaved as in a live room, fill
// the readings bucket's pages: the layout of schema 2 exists for this.
func TestReadingsPagesFill(t *testing.T) {
	db, _ := openTemp(t)
	defer db.Close()
	s, err := db.CreateSession(domain.Session{Title: "fill", JoinCode: "FILL22"})
	if err != nil {
		t.Fatal(err)
	}
	var bs []domain.Bench
	for i := 0; i < 30; i++ {
		bs = append(bs, domain.Bench{Label: fmt.Sprintf("B%d", i), Experiment: "coil_force"})
	}
	if bs, err = db.PutBenches(s.ID, bs); err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	for _, b := range bs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := 0; k < 100; k++ {
				if _, _, err := db.AppendReading(s.ID, b.ID, domain.Reading{ID: "l" + strconv.Itoa(k),
					Values: domain.ValuesOf(map[string]domain.Quantity{"current": {Value: 1.5, Unit: "A"}, "force": {Value: 0.072, Unit: "N"}})}); err != nil {
					t.Error(err)
					return
				}
			}
		}()
	}
	wg.Wait()
	db.bolt.View(func(tx *bbolt.Tx) error {
		st := tx.Bucket(bucketReadings).Stats()
		if fill := float64(st.LeafInuse) / float64(st.LeafAlloc); st.KeyN != 3000 || fill < 0.9 {
			t.Errorf("readings: %d keys, leaf pages %.0f %% full; want 3000 keys, ≥ 90 %%", st.KeyN, 100*fill)
		}
		return nil
	})
}
