package store

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"slices"

	"go.etcd.io/bbolt"
)

// upgrades[v] turns a file of schema version v into v+1, inside the
// transaction that opens it.
var upgrades = map[uint64]func(*bbolt.Tx) error{
	1: upgradeReadingsBySession,
}

// v1 kept readings in bucket "readings" keyed session | bench | sequence,
// and an index of reading ids in "reading_ids".
var (
	bucketReadingsV1   = []byte("readings")
	bucketReadingIDsV1 = []byte("reading_ids")
)

// upgradeReadingsBySession moves every reading to the session | sequence |
// bench key of schema 2, one session at a time in key order, so the new
// bucket is written full, and drops the old bucket and the id index.
func upgradeReadingsBySession(tx *bbolt.Tx) error {
	old := tx.Bucket(bucketReadingsV1)
	if old == nil {
		return nil
	}
	dst := tx.Bucket(bucketReadings)
	dst.FillPercent = appendFill
	type kv struct{ k, v []byte }
	var session []byte
	var batch []kv
	flush := func() error {
		slices.SortFunc(batch, func(a, b kv) int { return bytes.Compare(a.k, b.k) })
		for _, e := range batch {
			if err := dst.Put(e.k, e.v); err != nil {
				return err
			}
		}
		batch = batch[:0]
		return nil
	}
	c := old.Cursor()
	for k, v := c.First(); k != nil; k, v = c.Next() {
		if len(k) != 24 {
			return fmt.Errorf("corrupt v1 reading key of %d bytes", len(k))
		}
		if !bytes.Equal(k[:8], session) {
			if err := flush(); err != nil {
				return err
			}
			session = slices.Clone(k[:8])
		}
		sid, bid, seq := binary.BigEndian.Uint64(k[0:8]), binary.BigEndian.Uint64(k[8:16]), binary.BigEndian.Uint64(k[16:24])
		// Values live only as long as the transaction's pages: copy them.
		batch = append(batch, kv{readingKey(sid, bid, seq), slices.Clone(v)})
	}
	if err := flush(); err != nil {
		return err
	}
	if tx.Bucket(bucketReadingIDsV1) != nil {
		if err := tx.DeleteBucket(bucketReadingIDsV1); err != nil {
			return err
		}
	}
	return tx.DeleteBucket(bucketReadingsV1)
}
