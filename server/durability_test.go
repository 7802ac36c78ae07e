//go:build failpoints

package server

import (
	"context"
	"errors"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// TestNothingAcknowledgedBeforeCommit (a failpoints build: make test runs it)
// fails a submission at each stage: a
// failure before the commit stores nothing; one after it stores the reading
// but does not acknowledge it, and the station's retry with the same id is
// then acknowledged as a duplicate, never stored twice.
func TestNothingAcknowledgedBeforeCommit(t *testing.T) {
	for _, stage := range []string{"received", "committed", "replying"} {
		t.Run(stage, func(t *testing.T) {
			armed := true
			r := startRigPrepared(t, Config{}, func(srv *Server) {
				srv.SetHooks(Hooks{FailPoint: func(s string) error {
					if armed && s == stage {
						return errors.New("injected failure at " + s)
					}
					return nil
				}})
			})
			ctx := context.Background()
			sess, benches := setupRoom(t, r)
			_, err := submit(ctx, r, sess.SessionId, benches[0].BenchId, "fp-1", 1, 0.48)
			if status.Code(err) != codes.Internal {
				t.Fatalf("submission failed at %s: %v, want Internal (not acknowledged)", stage, err)
			}
			_, rs, _ := r.db.BenchReadings(sess.SessionId, benches[0].BenchId)
			wantStored := stage != "received"
			if (len(rs) == 1) != wantStored || len(rs) > 1 {
				t.Errorf("after a failure at %s: %d readings stored, want stored=%v", stage, len(rs), wantStored)
			}
			armed = false
			res, err := submit(ctx, r, sess.SessionId, benches[0].BenchId, "fp-1", 1, 0.48)
			if err != nil {
				t.Fatal(err)
			}
			if res.Duplicate != wantStored {
				t.Errorf("retry: duplicate = %v, want %v", res.Duplicate, wantStored)
			}
			_, rs, _ = r.db.BenchReadings(sess.SessionId, benches[0].BenchId)
			if len(rs) != 1 {
				t.Errorf("after the retry: %d readings, want exactly 1", len(rs))
			}
		})
	}
	_ = pb.Verdict_VERDICT_CHECK
}
