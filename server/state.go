package server

import (
	"context"
	"errors"
	"maps"
	"slices"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/export"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/store"
)

// benchView is a bench judged afresh from the file, with the plot, as its
// detail and its station's page show it.
type benchView struct {
	session  domain.Session
	state    *pb.BenchState
	judged   domain.Assessment
	readings []domain.Reading
}

// benchState reads a bench, its readings and its session, and judges them.
func (s *Server) benchState(sessionID, benchID uint64) (benchView, error) {
	if sessionID == 0 {
		return benchView{}, domain.Invalid("session_id", "is missing")
	}
	b, rs, err := s.db.BenchReadings(sessionID, benchID)
	if errors.Is(err, store.ErrNotFound) {
		return benchView{}, domain.Invalid("bench_id", "no bench %d in session %d", benchID, sessionID)
	}
	if err != nil {
		return benchView{}, err
	}
	sess, err := s.db.Session(sessionID)
	if err != nil {
		return benchView{}, err
	}
	st, a, err := s.judge(sess, b, nil, rs, nil, nil)
	if err != nil {
		return benchView{}, err
	}
	return benchView{session: sess, state: st, judged: a, readings: rs}, nil
}

// session loads the session a request names, as a field error when there
// is none.
func (s *Server) session(id uint64) (domain.Session, error) {
	sess, err := s.db.Session(id)
	if errors.Is(err, store.ErrNotFound) {
		return domain.Session{}, domain.Invalid("session_id", "no session %d", id)
	}
	return sess, err
}

// graded reads a whole session and grades it under its policy.
func (s *Server) graded(id uint64) (export.Session, error) {
	d, err := s.db.ReadSession(id)
	if errors.Is(err, store.ErrNotFound) {
		return export.Session{}, domain.Invalid("session_id", "no session %d", id)
	}
	if err != nil {
		return export.Session{}, err
	}
	return export.Prepare(d)
}

// checkSupersedes makes sure a correction names an earlier reading of the
// same bench.
func (s *Server) checkSupersedes(sessionID, benchID uint64, readingID, supersedes string) error {
	if err := domain.ValidateReadingID("supersedes", supersedes); err != nil {
		return err
	}
	if supersedes == readingID {
		return domain.Invalid("supersedes", "a reading cannot correct itself")
	}
	_, rs, err := s.db.BenchReadings(sessionID, benchID)
	if err != nil {
		return err
	}
	for _, r := range rs {
		if r.ID == supersedes {
			return nil
		}
	}
	return domain.Invalid("supersedes", "bench %d has no reading %q to correct", benchID, supersedes)
}

// note stores an audit-log entry and republishes the bench, whose alert
// state may have changed.
func (s *Server) note(ctx context.Context, sessionID uint64, n domain.Note) (*pb.Note, error) {
	if _, err := s.bench(sessionID, n.BenchID); err != nil {
		return nil, err
	}
	n.Author, n.StaffID = author(ctx)
	if err := domain.ValidateNote(n); err != nil {
		return nil, err
	}
	if err := s.db.AppendNote(sessionID, n); err != nil {
		return nil, err
	}
	if err := s.publishBench(sessionID, n.BenchID); err != nil {
		return nil, err
	}
	return noteToPB(n), nil
}

// author is who the audit log names for a staff call: the person, or the
// administrator.
func author(ctx context.Context) (name string, staffID uint64) {
	c, _ := callerOf(ctx)
	return c.name(), c.staff.ID
}

// auditNote is the audit log's entry for a change of a session (benchID
// 0) or of one bench, by the caller; the store writes it in the change's
// own transaction, so neither is kept without the other.
func (s *Server) auditNote(ctx context.Context, benchID uint64, kind, text string) domain.Note {
	name, id := author(ctx)
	return domain.Note{BenchID: benchID, Kind: kind, Text: text, Author: name, StaffID: id, At: s.now()}
}

// rejudgeRoom reads a session's room back from the file and judges every
// bench once, after a change of the session that affects them all (its
// tolerance, its grading policy), and publishes every bench's state and the
// room's findings to its watchers.
func (s *Server) rejudgeRoom(sessionID uint64) error {
	mu := s.hub.sessionLock(sessionID)
	mu.Lock()
	defer mu.Unlock()
	s.rooms.drop(sessionID)
	rs, err := s.loadRoom(sessionID)
	if err != nil {
		return err
	}
	states := make([]*pb.BenchState, 0, len(rs.states))
	for _, id := range slices.Sorted(maps.Keys(rs.states)) {
		states = append(states, rs.shown(id))
	}
	s.hub.publishBenches(sessionID, states)
	// loadRoom worked the findings out afresh: the watchers still show the
	// ones from before the change.
	s.hub.publishFindings(sessionID, &pb.RoomFindings{Findings: findingsToPB(rs.findings)})
	return nil
}

// publishBench reads a bench back from the file after a change other than a
// new reading (its benches, notes, tolerance), judges it and sends its
// state, and the room's findings when they change, to the room's watchers.
func (s *Server) publishBench(sessionID, benchID uint64) error {
	return s.withRoom(sessionID, func(rs *roomState) error {
		b, readings, err := s.db.BenchReadings(sessionID, benchID)
		if err != nil {
			return err
		}
		rs.setBench(b)
		rs.readings[benchID] = readings
		if err := s.judgeCached(rs, benchID, nil); err != nil {
			return err
		}
		// Only this bench's flag changes here; checkStalls publishes the others'.
		results := rs.resultList()
		rs.stalled[benchID] = domain.StalledBenches(results, s.now(), s.stallAfter)[benchID]
		s.hub.publishBenches(sessionID, []*pb.BenchState{rs.shown(benchID)})
		s.publishFindings(sessionID, rs, results)
		return nil
	})
}

// snapshot is the whole room now, from the room cache.
func (s *Server) snapshot(sess domain.Session) (*pb.RoomSnapshot, error) {
	snap := &pb.RoomSnapshot{Session: sessionToPB(sess)}
	err := s.withRoom(sess.ID, func(rs *roomState) error {
		snap.Findings = findingsToPB(rs.findings)
		for _, st := range rs.states {
			snap.Benches = append(snap.Benches, rs.shown(st.GetBench().GetBenchId()))
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	slices.SortFunc(snap.Benches, func(a, b *pb.BenchState) int {
		if d := a.GetBench().GetRow() - b.GetBench().GetRow(); d != 0 {
			return int(d)
		}
		return int(a.GetBench().GetColumn() - b.GetBench().GetColumn())
	})
	return snap, nil
}

// setMembers stores a group's names on its bench and shows them in the room.
func (s *Server) setMembers(sessionID, benchID uint64, members string, audit ...domain.Note) error {
	err := s.db.SetMembers(sessionID, benchID, members, audit...)
	s.benches.forget(sessionID)
	if err != nil {
		return err
	}
	return s.publishBench(sessionID, benchID)
}
