package server

import (
	"cmp"
	"errors"
	"slices"
	"sync"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/store"
)

// bench loads a bench named by a request, as a field error when it is not
// there: from its session's list in the cache, so that a campus's benches
// are held once, and a session's first reading after a change of its
// benches reads them all in one transaction.
func (s *Server) bench(sessionID, benchID uint64) (domain.Bench, error) {
	if sessionID == 0 {
		return domain.Bench{}, domain.Invalid("session_id", "is missing")
	}
	if benchID == 0 {
		return domain.Bench{}, domain.Invalid("bench_id", "is missing")
	}
	// A session that is not there has no benches: the same field error.
	bs, err := s.sessionBenches(sessionID)
	if err != nil && !errors.Is(err, store.ErrNotFound) {
		return domain.Bench{}, err
	}
	i, found := slices.BinarySearchFunc(bs, benchID, func(b domain.Bench, id uint64) int { return cmp.Compare(b.ID, id) })
	if !found {
		return domain.Bench{}, domain.Invalid("bench_id", "no bench %d in session %d", benchID, sessionID)
	}
	return bs[i], nil
}

// sessionBenches is a session's benches in id order, as JoinBench looks a
// label up among them: from the cache, read from the file once per change
// of the session's benches rather than decoding every bench at every join.
func (s *Server) sessionBenches(sessionID uint64) ([]domain.Bench, error) {
	if bs, ok := s.benches.list(sessionID); ok {
		return bs, nil
	}
	gen := s.benches.generation(sessionID)
	bs, err := s.db.Benches(sessionID)
	if err != nil {
		return nil, err
	}
	s.benches.putList(sessionID, bs, gen)
	return bs, nil
}

// benchCache holds sessions' lists of benches read from the file. Every
// write of a session's benches calls forget, which also bumps the
// session's generation, so a read that raced with the write is not
// cached.
type benchCache struct {
	mu  sync.RWMutex
	all map[uint64][]domain.Bench
	gen map[uint64]uint64
}

// list returns a session's cached benches; treat them as read-only.
func (c *benchCache) list(sessionID uint64) ([]domain.Bench, bool) {
	c.mu.RLock()
	defer c.mu.RUnlock()
	bs, ok := c.all[sessionID]
	return bs, ok
}

func (c *benchCache) putList(sessionID uint64, bs []domain.Bench, gen uint64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.gen[sessionID] != gen {
		return
	}
	if c.all == nil {
		c.all = map[uint64][]domain.Bench{}
	}
	c.all[sessionID] = bs
}

func (c *benchCache) generation(sessionID uint64) uint64 {
	c.mu.RLock()
	defer c.mu.RUnlock()
	return c.gen[sessionID]
}

// forget drops a session's cached benches; call it after writing them.
func (c *benchCache) forget(sessionID uint64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.gen == nil {
		c.gen = map[uint64]uint64{}
	}
	c.gen[sessionID]++
	delete(c.all, sessionID)
}
