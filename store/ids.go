package store

import (
	"time"

	"go.etcd.io/bbolt"

	"example.com/fluxroom/proto/recordpb"
)

// A station's retry must store nothing new, so every append looks up its
// bench and reading id. The file keeps no index for that: it would be a
// random page write per reading (half the cost of an append, and a third
// of the file). The committer keeps the index in memory instead, per
// session, read from the session's readings the first time the session
// gets one after the file is opened, and let go when the session has been
// quiet for idsIdle. The readings are the truth; the index is rebuilt from
// them after every restart.

// idsIdle is how long a quiet session's reading ids stay in memory.
const idsIdle = 10 * time.Minute

// readingIDs is the committers' index: session → bench → reading id →
// sequence. Only the caller committing touches it, one at a time
// (DB.AppendReading).
type readingIDs struct {
	sessions  map[uint64]*sessionIDs
	lastSweep time.Time
}

type sessionIDs struct {
	benches map[uint64]map[string]uint64
	used    time.Time
}

// session returns a session's ids, reading them from the file inside tx the
// first time.
func (x *readingIDs) session(tx *bbolt.Tx, sessionID uint64, now time.Time) (*sessionIDs, error) {
	if x.sessions == nil {
		x.sessions = map[uint64]*sessionIDs{}
	}
	s, ok := x.sessions[sessionID]
	if !ok {
		s = &sessionIDs{benches: map[uint64]map[string]uint64{}}
		if err := eachReading(tx, sessionID, 0, func(benchID, seq uint64, r *recordpb.Reading) {
			s.add(benchID, r.GetReadingId(), seq)
		}); err != nil {
			return nil, err
		}
		x.sessions[sessionID] = s
	}
	s.used = now
	return s, nil
}

func (s *sessionIDs) lookup(benchID uint64, readingID string) (uint64, bool) {
	seq, ok := s.benches[benchID][readingID]
	return seq, ok
}

func (s *sessionIDs) add(benchID uint64, readingID string, seq uint64) {
	b := s.benches[benchID]
	if b == nil {
		b = map[string]uint64{}
		s.benches[benchID] = b
	}
	b[readingID] = seq
}

func (s *sessionIDs) remove(benchID uint64, readingID string) { delete(s.benches[benchID], readingID) }

// sweep lets go of quiet sessions, at most once a minute.
func (x *readingIDs) sweep(now time.Time) {
	if now.Sub(x.lastSweep) < time.Minute {
		return
	}
	x.lastSweep = now
	for id, s := range x.sessions {
		if now.Sub(s.used) >= idsIdle {
			delete(x.sessions, id)
		}
	}
}
