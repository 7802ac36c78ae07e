package server

import (
	"sync"
	"time"

	"example.com/fluxroom/domain"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// A reading is acknowledged as soon as it is durable; its bench is judged
// and published to the room by the session's judge, one goroutine per
// session with new readings. The judge takes every reading that arrived
// while it was busy in one pass: a bench that got three readings is judged
// once, and the room's findings are worked out once per pass, so a busy
// room costs less per reading than a quiet one instead of more.

// roomJudge is a session's queue of committed readings waiting to be
// judged.
type roomJudge struct {
	mu sync.Mutex
	// pending are the readings committed since the last pass, in commit
	// order: one list, reused pass after pass, instead of a list per bench
	// grown afresh in a map each pass.
	pending []pendingReading
	// since is when the oldest pending reading was committed (zero when
	// none is pending), for the judge-lag metric.
	since time.Time
	// done is set, under mu, when the judge stops after a quiet spell;
	// whoever finds it set starts a new one.
	done bool
	wake chan struct{}
}

type pendingReading struct {
	benchID uint64
	reading domain.Reading
}

// judged enqueues a committed reading for its session's judge and returns
// at once.
func (s *Server) judged(sessionID, benchID uint64, r domain.Reading) {
	var j *roomJudge
	for {
		v, ok := s.judges.Load(sessionID)
		if !ok {
			fresh := &roomJudge{wake: make(chan struct{}, 1)}
			if v, ok = s.judges.LoadOrStore(sessionID, fresh); !ok && !s.goBackground(func() { s.runJudge(sessionID, fresh) }) {
				// Shutting down: the reading is in the file, and is
				// judged when its room is next loaded.
				s.judges.CompareAndDelete(sessionID, fresh)
				return
			}
		}
		j = v.(*roomJudge)
		j.mu.Lock()
		if !j.done {
			break
		}
		j.mu.Unlock() // it just stopped: start another
	}
	if len(j.pending) == 0 {
		j.since = time.Now()
	}
	j.pending = append(j.pending, pendingReading{benchID, r})
	j.mu.Unlock()
	select {
	case j.wake <- struct{}{}:
	default:
	}
}

// findingsEvery spaces a room's findings: they sum up many benches and move
// slowly, so a busy room works them out at most this often, and a quiet
// room at once.
const findingsEvery = 200 * time.Millisecond

// maxSpareBatch is the longest list of pending readings a judge keeps for
// its next pass.
const maxSpareBatch = 1024

func (s *Server) runJudge(sessionID uint64, j *roomJudge) {
	var lastFindings time.Time
	var findingsDue <-chan time.Time
	findingsOwed := false
	var spare []pendingReading
	quiet := time.NewTimer(s.roomIdle)
	defer quiet.Stop()
	for {
		select {
		case <-s.done:
			return
		case <-j.wake:
		case <-findingsDue:
			findingsDue = nil
		case <-quiet.C:
			// A quiet room's judge stops, unless a reading just came.
			j.mu.Lock()
			if len(j.pending) == 0 && !findingsOwed {
				j.done = true
				s.judges.CompareAndDelete(sessionID, j)
				j.mu.Unlock()
				return
			}
			j.mu.Unlock()
		}
		quiet.Reset(s.roomIdle)
		j.mu.Lock()
		batch, since := j.pending, j.since
		j.pending, j.since = spare[:0], time.Time{}
		j.mu.Unlock()
		now := time.Now()
		findingsOwed = findingsOwed || len(batch) > 0
		withFindings := findingsOwed && now.Sub(lastFindings) >= findingsEvery
		if len(batch) > 0 || withFindings {
			if err := s.judgePass(sessionID, batch, withFindings); err != nil {
				s.log.Error("judging a room", "session_id", sessionID, "err", err)
			} else if len(batch) > 0 && !since.IsZero() {
				s.metrics.judgeLag.observe(time.Since(since))
			}
		}
		if withFindings {
			lastFindings, findingsOwed = now, false
		}
		// The next pass fills this one's list; a burst's long list is let go.
		spare = nil
		if cap(batch) <= maxSpareBatch {
			clear(batch)
			spare = batch
		}
		if findingsOwed && findingsDue == nil {
			findingsDue = time.After(lastFindings.Add(findingsEvery).Sub(now))
		}
	}
}

// judgePass adds a batch of committed readings to the room, judges each
// bench that got one and publishes their states, and then, withFindings,
// the room's findings if they changed.
func (s *Server) judgePass(sessionID uint64, batch []pendingReading, withFindings bool) error {
	return s.withRoom(sessionID, func(rs *roomState) error {
		return s.judgeBatch(sessionID, rs, batch, withFindings)
	})
}

// judgeBatch is judgePass's work, with the session's publish lock held.
func (s *Server) judgeBatch(sessionID uint64, rs *roomState, batch []pendingReading, withFindings bool) error {
	now := s.now()
	var changed []uint64
	seen := make(map[uint64]bool, len(batch))
	for _, p := range batch {
		if _, known := rs.benches[p.benchID]; !known {
			continue
		}
		rs.readings[p.benchID] = mergeReading(rs.readings[p.benchID], p.reading)
		if !seen[p.benchID] {
			seen[p.benchID] = true
			changed = append(changed, p.benchID)
		}
	}
	for _, bid := range changed {
		if err := s.judgeCached(rs, bid, nil); err != nil {
			return err
		}
	}
	s.metrics.judgings.Add(int64(len(changed)))
	// Only the changed benches' stalled flags move here, and the room is
	// moving because they are: the rule over them alone answers for them.
	// checkStalls publishes the others'.
	moved := make([]domain.BenchResult, 0, len(changed))
	for _, bid := range changed {
		moved = append(moved, rs.results[bid])
	}
	stalled := domain.StalledBenches(moved, now, s.stallAfter)
	states := make([]*pb.BenchState, len(changed))
	for i, bid := range changed {
		rs.stalled[bid] = stalled[bid]
		states[i] = rs.shown(bid)
	}
	s.hub.publishBenches(sessionID, states)
	if withFindings {
		s.publishFindings(sessionID, rs, rs.resultList())
	}
	return nil
}

// mergeReading adds a committed reading to a bench's cached list, kept in
// the file's order (by sequence). The room may have been loaded from the
// file after the reading was committed: then it is there already.
func mergeReading(list []domain.Reading, r domain.Reading) []domain.Reading {
	i := len(list)
	for i > 0 && list[i-1].Sequence > r.Sequence {
		i--
	}
	if i > 0 && list[i-1].Sequence == r.Sequence {
		return list
	}
	list = append(list, domain.Reading{})
	copy(list[i+1:], list[i:])
	list[i] = r
	return list
}

// publishFindings works out the room's findings from its results and
// publishes them when they changed. Call with the session's publish lock
// held.
func (s *Server) publishFindings(sessionID uint64, rs *roomState, results []domain.BenchResult) {
	if f := domain.RoomFindings(results, rs.session.EffectiveTolerance()); !sameFindings(f, rs.findings) {
		rs.findings = f
		s.hub.publishFindings(sessionID, &pb.RoomFindings{Findings: findingsToPB(f)})
	}
}
