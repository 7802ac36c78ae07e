package store

import (
	"encoding/binary"
	"fmt"
)

// SchemaVersion is the layout this build reads and writes. Bump it, and add
// an upgrade step in upgrades, whenever a bucket or key layout changes.
//
//	1: readings keyed session | bench | sequence, and an index of reading
//	   ids in bucket reading_ids.
//	2: readings keyed session | sequence | bench, in bucket
//	   readings_by_session: appended in order, so pages fill; no id index
//	   in the file (the writer keeps it in memory, see ids.go). About half
//	   the file per reading.
//	3: staff accounts in bucket staff; every session has a course (older
//	   ones take their title); audit events name the staff account.
const SchemaVersion = 3

// Buckets. Every one is created when the file is opened.
var (
	// bucketMeta holds keySchemaVersion → uint64 big-endian.
	bucketMeta = []byte("meta")
	// bucketSessions: sessionKey → recordpb.Session.
	bucketSessions = []byte("sessions")
	// bucketJoinCodes: join code (UTF-8) → session id (uint64 big-endian).
	bucketJoinCodes = []byte("join_codes")
	// bucketBenches: benchKey → recordpb.Bench.
	bucketBenches = []byte("benches")
	// bucketReadings: readingKey → recordpb.Reading. Append-only.
	bucketReadings = []byte("readings_by_session")
	// bucketEvents: eventKey → recordpb.Event, a session's audit log of
	// notes and acknowledged alerts. Append-only.
	bucketEvents = []byte("events")
	// bucketStaff: staffKey → recordpb.Staff, the people who hold keys.
	bucketStaff = []byte("staff")

	allBuckets = [][]byte{bucketMeta, bucketSessions, bucketJoinCodes, bucketBenches, bucketReadings, bucketEvents, bucketStaff}

	keySchemaVersion = []byte("schema_version")
	// keyAdminKeyHash holds SHA-256 of the administrator's key (before
	// schema 3, the one instructor key, which the upgrade keeps as the
	// administrator's); the key itself is never stored.
	keyAdminKeyHash = []byte("instructor_key_sha256")
	// keyStationSecret holds the HMAC key that signs station tokens.
	keyStationSecret = []byte("station_token_secret")
)

func u64(v uint64) []byte {
	b := make([]byte, 8)
	binary.BigEndian.PutUint64(b, v)
	return b
}

func decodeU64(b []byte) (uint64, error) {
	if len(b) != 8 {
		return 0, fmt.Errorf("store: corrupt uint64 of %d bytes", len(b))
	}
	return binary.BigEndian.Uint64(b), nil
}

// sessionKey is the session id, 8 bytes big-endian.
func sessionKey(sessionID uint64) []byte { return u64(sessionID) }

// benchKey is session id (bytes 0–7) | bench id (bytes 8–15), big-endian, so
// one session's benches are contiguous.
func benchKey(sessionID, benchID uint64) []byte {
	k := make([]byte, 16)
	binary.BigEndian.PutUint64(k[0:8], sessionID)
	binary.BigEndian.PutUint64(k[8:16], benchID)
	return k
}

func decodeBenchKey(k []byte) (sessionID, benchID uint64, err error) {
	if len(k) != 16 {
		return 0, 0, fmt.Errorf("store: corrupt bench key of %d bytes", len(k))
	}
	return binary.BigEndian.Uint64(k[0:8]), binary.BigEndian.Uint64(k[8:16]), nil
}

// readingKey is session id (0–7) | sequence (8–15) | bench id (16–23),
// big-endian: a session's readings are contiguous and in arrival order, and
// each new one goes at the end of its session's range, so pages are written
// full. A bench's readings are picked out by the key's last 8 bytes without
// decoding the others.
func readingKey(sessionID, benchID, seq uint64) []byte {
	k := make([]byte, 24)
	binary.BigEndian.PutUint64(k[0:8], sessionID)
	binary.BigEndian.PutUint64(k[8:16], seq)
	binary.BigEndian.PutUint64(k[16:24], benchID)
	return k
}

func decodeReadingKey(k []byte) (sessionID, benchID, seq uint64, err error) {
	if len(k) != 24 {
		return 0, 0, 0, fmt.Errorf("store: corrupt reading key of %d bytes", len(k))
	}
	return binary.BigEndian.Uint64(k[0:8]), binary.BigEndian.Uint64(k[16:24]), binary.BigEndian.Uint64(k[8:16]), nil
}

// staffKey is the staff id, 8 bytes big-endian.
func staffKey(staffID uint64) []byte { return u64(staffID) }

// eventKey is session id (0–7) | sequence (8–15), big-endian.
func eventKey(sessionID, seq uint64) []byte {
	k := make([]byte, 16)
	binary.BigEndian.PutUint64(k[0:8], sessionID)
	binary.BigEndian.PutUint64(k[8:16], seq)
	return k
}
