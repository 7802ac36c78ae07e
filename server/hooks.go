//go:build failpoints

package server

import (
	"time"

	"example.com/fluxroom/domain"
)

// Hooks are test switches, compiled only into a build with -tags
// failpoints (as bbolt and etcd compile their failpoints only into special
// builds): the release build has none of them (hooks_off.go), and its
// submission path pays nothing for them.
type Hooks struct {
	// FailPoint, when set, is called at each stage of a submission
	// ("received", "committed", "replying"); an error it returns fails the
	// call there. Tests use it to show that nothing is acknowledged before
	// it is committed.
	FailPoint func(stage string) error
	// AckBeforeCommit makes SubmitReading reply before its reading is
	// written. It exists only as the negative control of the durability
	// test, which must show that it loses readings.
	AckBeforeCommit bool
	// SkipJudging leaves committed readings unjudged, to show what judging
	// costs a reading (BenchmarkSubmitReadingUnjudged).
	SkipJudging bool
}

type hooks = Hooks

// SetHooks installs test switches. Call it before Serve.
func (s *Server) SetHooks(h Hooks) { s.hooks = h }

// fail runs the fail point of a submission stage.
func (s *Server) fail(stage string) error {
	if s.hooks.FailPoint == nil {
		return nil
	}
	return s.hooks.FailPoint(stage)
}

// ackEarly is the negative control: with AckBeforeCommit it writes the
// reading 50 ms later, on its own, and reports that the caller may answer
// at once.
func (s *Server) ackEarly(sessionID, benchID uint64, r domain.Reading) bool {
	if !s.hooks.AckBeforeCommit {
		return false
	}
	go func() {
		time.Sleep(50 * time.Millisecond)
		s.db.AppendReading(sessionID, benchID, r)
	}()
	return true
}

func (s *Server) skipJudging() bool { return s.hooks.SkipJudging }
