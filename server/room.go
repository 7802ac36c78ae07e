package server

import (
	"slices"
	"sync"
	"time"

	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/export"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// rooms caches, per session, what the room-level rules need: every bench's
// last state and result, the findings and which benches are stalled. It is
// filled from the store on first use and updated on every change, always
// under the session's publish lock.
type rooms struct {
	mu sync.Mutex
	m  map[uint64]*roomState
}

type roomState struct {
	states   map[uint64]*pb.BenchState
	results  map[uint64]domain.BenchResult
	findings []domain.RoomFinding
	stalled  map[uint64]bool
	// The data the states were judged from, so a new reading is judged
	// without reading the bench back from the file.
	session domain.Session
	// required is the session's grading policy's readings for a complete
	// run, by experiment, read once with the session (a policy change
	// reloads the room); nil when the stored policy does not parse.
	required map[string]int
	benches  map[uint64]domain.Bench
	readings map[uint64][]domain.Reading
	// memos keep each bench's judging work between readings.
	memos map[uint64]*domain.Memo
	// benchMsgs are the benches as their states carry them, made once per
	// change of the bench instead of once per judging; setBench keeps
	// them with benches.
	benchMsgs map[uint64]*pb.Bench
	// used is when the room was last judged or shown; a room nobody
	// watches that has been quiet for Config.RoomIdle leaves the cache.
	used time.Time
}

func (r *rooms) get(sessionID uint64) (*roomState, bool) {
	r.mu.Lock()
	defer r.mu.Unlock()
	rs, ok := r.m[sessionID]
	if ok {
		rs.used = time.Now()
	}
	return rs, ok
}

// peek is get without counting as a use.
func (r *rooms) peek(sessionID uint64) (*roomState, bool) {
	r.mu.Lock()
	defer r.mu.Unlock()
	rs, ok := r.m[sessionID]
	return rs, ok
}

// idle reports whether a cached room has gone unused for d.
func (r *rooms) idle(sessionID uint64, d time.Duration) bool {
	r.mu.Lock()
	defer r.mu.Unlock()
	rs, ok := r.m[sessionID]
	return ok && time.Since(rs.used) >= d
}

func (r *rooms) put(sessionID uint64, rs *roomState) {
	r.mu.Lock()
	defer r.mu.Unlock()
	if r.m == nil {
		r.m = map[uint64]*roomState{}
	}
	r.m[sessionID] = rs
}

func (r *rooms) drop(sessionID uint64) {
	r.mu.Lock()
	defer r.mu.Unlock()
	delete(r.m, sessionID)
}

func (r *rooms) sessions() []uint64 {
	r.mu.Lock()
	defer r.mu.Unlock()
	ids := make([]uint64, 0, len(r.m))
	for id := range r.m {
		ids = append(ids, id)
	}
	return ids
}

// loadRoom judges every bench of a session and caches the room. Call with
// the session's publish lock held.
func (s *Server) loadRoom(sessionID uint64) (*roomState, error) {
	if rs, ok := s.rooms.get(sessionID); ok {
		return rs, nil
	}
	d, err := s.db.ReadSession(sessionID)
	if err != nil {
		return nil, err
	}
	rs := &roomState{states: map[uint64]*pb.BenchState{}, results: map[uint64]domain.BenchResult{}, stalled: map[uint64]bool{}, used: time.Now(),
		session: d.Session, benches: map[uint64]domain.Bench{}, readings: d.Readings, memos: map[uint64]*domain.Memo{},
		benchMsgs: map[uint64]*pb.Bench{}}
	if p, err := export.ParsePolicy([]byte(d.Session.GradingPolicy)); err == nil {
		rs.required = p.RequiredReadings
	}
	for _, b := range d.Benches {
		rs.setBench(b)
		if err := s.judgeCached(rs, b.ID, d.Notes); err != nil {
			return nil, err
		}
	}
	rs.findings = domain.RoomFindings(rs.resultList(), rs.session.EffectiveTolerance())
	rs.stalled = domain.StalledBenches(rs.resultList(), s.now(), s.stallAfter)
	s.rooms.put(sessionID, rs)
	return rs, nil
}

// withRoom runs f on a session's room, loaded if it is not cached, with the
// session's publish lock held.
func (s *Server) withRoom(sessionID uint64, f func(rs *roomState) error) error {
	mu := s.hub.sessionLock(sessionID)
	mu.Lock()
	defer mu.Unlock()
	rs, err := s.loadRoom(sessionID)
	if err != nil {
		return err
	}
	return f(rs)
}

// setBench caches a bench as read from the file, with its message.
func (rs *roomState) setBench(b domain.Bench) {
	rs.benches[b.ID] = b
	rs.benchMsgs[b.ID] = benchToPB(b)
}

func (rs *roomState) resultList() []domain.BenchResult {
	out := make([]domain.BenchResult, 0, len(rs.results))
	for _, r := range rs.results {
		out = append(out, r)
	}
	slices.SortFunc(out, func(a, b domain.BenchResult) int { return int(a.BenchID) - int(b.BenchID) })
	return out
}

// shown is the state the room shows for a bench: its judged state, with
// its activity when the group stopped while the room moves on: "done" when
// the run is complete under the session's grading policy, else "stalled".
// The verdict stays the judging's: a quiet bench that is off is still off.
func (rs *roomState) shown(id uint64) *pb.BenchState {
	st := rs.states[id]
	if !rs.stalled[id] || st == nil {
		return st
	}
	out := proto.Clone(st).(*pb.BenchState)
	out.Activity = "stalled"
	if need := rs.required[st.GetBench().GetExperiment()]; need > 0 && int(st.GetReadingCount()) >= need {
		out.Activity = "done"
	}
	return out
}

func sameFindings(a, b []domain.RoomFinding) bool {
	return slices.EqualFunc(a, b, func(x, y domain.RoomFinding) bool {
		return x.Code == y.Code && x.Message == y.Message && slices.Equal(x.BenchIDs, y.BenchIDs)
	})
}

// checkStalls re-evaluates every cached room and publishes the benches
// whose stalled flag changed, and drops from the cache the rooms nobody
// watches that were quiet for Config.RoomIdle: they are read back from the
// file when next needed. The server runs it on a ticker.
func (s *Server) checkStalls() {
	now := s.now()
	for _, id := range s.rooms.sessions() {
		mu := s.hub.sessionLock(id)
		mu.Lock()
		if s.rooms.idle(id, s.roomIdle) && s.hub.watchersOf(id) == 0 {
			s.rooms.drop(id)
			s.benches.forget(id)
			mu.Unlock()
			continue
		}
		if rs, ok := s.rooms.peek(id); ok {
			stalled := domain.StalledBenches(rs.resultList(), now, s.stallAfter)
			var states []*pb.BenchState
			for bid := range rs.states {
				if stalled[bid] != rs.stalled[bid] {
					rs.stalled[bid] = stalled[bid]
					states = append(states, rs.shown(bid))
				}
			}
			s.hub.publishBenches(id, states)
		}
		mu.Unlock()
	}
}

// judgeCached judges a bench from the room's cached data. notes are the
// session's audit log when already at hand; nil reads it, and only when the
// bench is unsafe (to see whether its alert was acknowledged).
func (s *Server) judgeCached(rs *roomState, benchID uint64, notes []domain.Note) error {
	b := rs.benches[benchID]
	readings := rs.readings[benchID]
	m := rs.memos[benchID]
	if m == nil {
		m = &domain.Memo{}
		rs.memos[benchID] = m
	}
	st, a, err := s.judge(rs.session, b, rs.benchMsgs[benchID], readings, notes, m)
	if err != nil {
		return err
	}
	rs.states[benchID] = st
	rs.results[benchID] = domain.ResultOfMemo(b, a, readings, m)
	return nil
}

// judge assesses a bench under its session's tolerance and, when it is
// unsafe, looks up whether its alert was acknowledged. notes is the
// session's audit log when already at hand; nil reads it, and only then.
// It is the one place a bench's state is made. bm (the bench's message)
// and m (its memo) are the room cache's when it keeps them, else nil.
func (s *Server) judge(sess domain.Session, b domain.Bench, bm *pb.Bench, readings []domain.Reading, notes []domain.Note, m *domain.Memo) (*pb.BenchState, domain.Assessment, error) {
	tol := s.tol
	if sess.Tolerance != (domain.Tolerance{}) {
		tol = sess.EffectiveTolerance()
	}
	// The room's judging (with the bench's memo) leaves out the plot; a
	// bench judged on its own, for its state or its detail, has it.
	var a domain.Assessment
	if m != nil {
		a = domain.AssessMemo(b, readings, tol, m)
	} else {
		a = domain.Assess(b, readings, tol)
	}
	if bm == nil {
		bm = benchToPB(b)
	}
	st := stateToPB(bm, a)
	if a.Verdict == domain.Unsafe {
		if notes == nil {
			var err error
			if notes, err = s.db.Notes(sess.ID); err != nil {
				return nil, domain.Assessment{}, err
			}
		}
		st.AlertAcknowledged = acknowledged(notes, b.ID, a.LastReadingAt)
	}
	return st, a, nil
}

// acknowledged reports whether an instructor acknowledged the bench's
// alert at or after its last reading.
func acknowledged(notes []domain.Note, benchID uint64, last time.Time) bool {
	for _, n := range notes {
		if n.BenchID == benchID && n.Kind == domain.NoteKindAcknowledged && !n.At.Before(last) {
			return true
		}
	}
	return false
}
