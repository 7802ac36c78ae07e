package store

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"slices"

	"go.etcd.io/bbolt"
	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/proto/recordpb"
)

// upgrades[v] turns a file of schema version v into v+1, inside the
// transaction that opens it.
var upgrades = map[uint64]func(*bbolt.Tx) error{
	1: upgradeReadingsBySession,
	2: upgradeSessionCourses,
}

// upgradeSessionCourses gives every session a course, its title: a
// department's first staff accounts are then given roles in the courses
// their sessions already show. The instructor key stays where it was, as
// the administrator's.
func upgradeSessionCourses(tx *bbolt.Tx) error {
	b := tx.Bucket(bucketSessions)
	type kv struct{ k, v []byte }
	var changed []kv
	err := b.ForEach(func(k, v []byte) error {
		var r recordpb.Session
		if err := proto.Unmarshal(v, &r); err != nil {
			return fmt.Errorf("decode session %x: %w", k, err)
		}
		if r.Course != "" {
			return nil
		}
		r.Course = r.Title
		nv, err := proto.Marshal(&r)
		if err != nil {
			return err
		}
		changed = append(changed, kv{slices.Clone(k), nv})
		return nil
	})
	if err != nil {
		return err
	}
	// Written after the walk: bbolt forbids changing a bucket while its
	// ForEach runs.
	for _, e := range changed {
		if err := b.Put(e.k, e.v); err != nil {
			return err
		}
	}
	return nil
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
