package server

import (
	"context"
	"fmt"
	"net"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/internal/bearer"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

// TestAuthorizationMatrix calls every RPC as every role: no credential, a
// forged token, the instructor, a station on its own bench and a station on
// another bench; then again after the session is closed.
func TestAuthorizationMatrix(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	sid, own, other := sess.SessionId, benches[0].BenchId, benches[1].BenchId
	join := func(label string) string {
		res, err := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: label})
		if err != nil {
			t.Fatal(err)
		}
		return res.StationToken
	}
	ownTok, otherTok := join("A1"), join("A2")
	_ = other
	conns := map[string]*grpc.ClientConn{}
	dial := func(role, tok string) {
		c, err := grpc.NewClient(r.addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(tok)))
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { c.Close() })
		conns[role] = c
	}
	dial("none", "")
	dial("forged", ownTok[:len(ownTok)-2]+"xx")
	dial("instructor", testKey)
	dial("station-own", ownTok)
	dial("station-other", otherTok) // a valid token, but for A2, calling as A1

	values := map[string]*pb.Quantity{"current": q(1, "A"), "force": q(0.48, "N")}
	n := 0
	type call struct {
		name string
		do   func(c *grpc.ClientConn) error
		// station: the call is a station's, on bench A1.
		station, public bool
	}
	calls := []call{
		{"JoinBench", func(c *grpc.ClientConn) error {
			_, err := rpcpb.NewStationServiceClient(c).JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: "A1"})
			return err
		}, false, true},
		{"ListExperiments", func(c *grpc.ClientConn) error {
			_, err := rpcpb.NewStationServiceClient(c).ListExperiments(ctx, &pb.ListExperimentsRequest{})
			return err
		}, false, true},
		{"SubmitReading", func(c *grpc.ClientConn) error {
			n++
			_, err := rpcpb.NewStationServiceClient(c).SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: own,
				ReadingId: "m" + string(rune('a'+n%26)) + string(rune('a'+n/26)), Values: values})
			return err
		}, true, false},
		{"GetBenchState", func(c *grpc.ClientConn) error {
			_, err := rpcpb.NewStationServiceClient(c).GetBenchState(ctx, &pb.GetBenchStateRequest{SessionId: sid, BenchId: own})
			return err
		}, true, false},
	}
	in := func(name string, f func(rpcpb.InstructorServiceClient) error) call {
		return call{name: name, do: func(c *grpc.ClientConn) error { return f(rpcpb.NewInstructorServiceClient(c)) }}
	}
	calls = append(calls,
		in("CreateSession", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.CreateSession(ctx, &pb.CreateSessionRequest{Title: "x"})
			return err
		}),
		in("ListSessions", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.ListSessions(ctx, &pb.ListSessionsRequest{})
			return err
		}),
		in("SetBenches", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sid})
			return err
		}),
		in("WatchRoom", func(c rpcpb.InstructorServiceClient) error {
			s, err := c.WatchRoom(ctx, &pb.WatchRoomRequest{SessionId: sid})
			if err != nil {
				return err
			}
			_, err = s.Recv()
			return err
		}),
		in("GetBenchDetail", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.GetBenchDetail(ctx, &pb.GetBenchDetailRequest{SessionId: sid, BenchId: own})
			return err
		}),
		in("UpdateSession", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.UpdateSession(ctx, &pb.UpdateSessionRequest{SessionId: sid})
			return err
		}),
		in("AddNote", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.AddNote(ctx, &pb.AddNoteRequest{SessionId: sid, BenchId: own, Text: "n"})
			return err
		}),
		in("AcknowledgeAlert", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.AcknowledgeAlert(ctx, &pb.AcknowledgeAlertRequest{SessionId: sid, BenchId: own})
			return err
		}),
		in("SetGradingPolicy", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.SetGradingPolicy(ctx, &pb.SetGradingPolicyRequest{SessionId: sid})
			return err
		}),
		in("OverrideGrade", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.OverrideGrade(ctx, &pb.OverrideGradeRequest{SessionId: sid, BenchId: own, Points: 1, Reason: "r"})
			return err
		}),
		in("Backup", func(c rpcpb.InstructorServiceClient) error {
			s, err := c.Backup(ctx, &pb.BackupRequest{})
			if err != nil {
				return err
			}
			_, err = s.Recv()
			return err
		}),
		in("CloseSession", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.CloseSession(ctx, &pb.CloseSessionRequest{SessionId: 999})
			return err
		}),
		in("Export", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.Export(ctx, &pb.ExportRequest{SessionId: sid, Format: pb.ExportFormat_EXPORT_FORMAT_JSON})
			return err
		}),
		in("SetGroupMembers", func(c rpcpb.InstructorServiceClient) error {
			_, err := c.SetGroupMembers(ctx, &pb.SetGroupMembersRequest{SessionId: sid, BenchId: own, Members: "Ines, Oren"})
			return err
		}),
	)
	denied := func(code codes.Code) bool { return code == codes.Unauthenticated || code == codes.PermissionDenied }
	cells := 0
	for _, c := range calls {
		for _, role := range []string{"none", "forged", "instructor", "station-own", "station-other"} {
			cells++
			code := status.Code(c.do(conns[role]))
			var want string
			switch {
			case c.public:
				want = "allowed"
			case role == "instructor":
				want = "allowed"
			case c.station && role == "station-own":
				want = "allowed"
			case c.station && role == "station-other":
				want = "PermissionDenied"
			default:
				want = "Unauthenticated"
			}
			ok := want == "allowed" && !denied(code) || want == code.String()
			if !ok {
				t.Errorf("%s as %s: %v, want %s", c.name, role, code, want)
			}
		}
	}
	// A closed session: its join code and its station tokens stop working.
	if _, err := r.instructor.CloseSession(ctx, &pb.CloseSessionRequest{SessionId: sid}); err != nil {
		t.Fatal(err)
	}
	cells += 3
	if code := status.Code(calls[2].do(conns["station-own"])); code != codes.PermissionDenied {
		t.Errorf("SubmitReading on a closed session as its station: %v, want PermissionDenied", code)
	}
	if err := calls[0].do(conns["none"]); !contains(fieldsOf(t, err), "join_code") {
		t.Errorf("JoinBench on a closed session: %v, want a join_code violation", err)
	}
	if code := status.Code(calls[2].do(conns["instructor"])); code != codes.FailedPrecondition {
		t.Errorf("SubmitReading on a closed session as the instructor: %v, want FailedPrecondition", code)
	}
	t.Logf("authorization matrix: %d cells (%d RPCs × 5 roles, plus 3 on a closed session)", cells, len(calls))
}

// TestGeneratedKeyIsShownOnceAndStoredHashed: with no key given, the first
// start makes one; the file holds only its hash, and a restart shows none.
func TestGeneratedKeyIsShownOnceAndStoredHashed(t *testing.T) {
	r := startRigWith(t, Config{InstructorKey: "k-1"})
	hash, _, err := r.db.Credentials(func() []byte { return nil })
	if err != nil || string(hash) == "k-1" || len(hash) != 32 {
		t.Errorf("stored %q, %v; want a 32-byte hash, never the key", hash, err)
	}
	// A fresh server on the same file with no key: it keeps the stored one.
	srv, err := New(Config{DB: r.db, Logger: r.srv.log})
	if err != nil {
		t.Fatal(err)
	}
	if srv.ShownKey() != "" || !srv.auth.isInstructor("k-1") {
		t.Errorf("a restart showed a key (%q) or lost the stored one", srv.ShownKey())
	}
	_ = net.IPv4len
}

// TestStationRateLimit: a station flooding readings gets ResourceExhausted
// past its burst, nothing it was refused is stored, and other benches are
// not held back.
func TestStationRateLimit(t *testing.T) {
	r := startRigWith(t, Config{StationRate: 1, StationBurst: 5, StationHold: 5 * time.Millisecond})
	ctx := context.Background()
	sess, _ := setupRoom(t, r)
	tokens := map[string]string{}
	for _, label := range []string{"A1", "A2"} {
		res, err := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: label})
		if err != nil {
			t.Fatal(err)
		}
		tokens[label] = res.StationToken
	}
	conn, _ := grpc.NewClient(r.addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(tokens["A1"])))
	defer conn.Close()
	st := rpcpb.NewStationServiceClient(conn)
	var ok, limited int
	join, _ := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: "A1"})
	for i := 0; i < 30; i++ {
		_, err := st.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sess.SessionId, BenchId: join.Bench.BenchId,
			ReadingId: "flood-" + string(rune('a'+i)), Values: map[string]*pb.Quantity{"current": q(1, "A"), "force": q(0.48, "N")}})
		switch status.Code(err) {
		case codes.OK:
			ok++
		case codes.ResourceExhausted:
			limited++
		default:
			t.Fatalf("reading %d: %v", i, err)
		}
	}
	if ok > 7 || limited < 23 {
		t.Errorf("%d stored, %d limited; want about 5 stored (the burst) and the rest limited", ok, limited)
	}
	if held := r.srv.metrics.rateLimited.Load(); held != int64(limited) {
		t.Errorf("rate-limited counter %d, want %d", held, limited)
	}
	_, rs, _ := r.db.BenchReadings(sess.SessionId, join.Bench.BenchId)
	if len(rs) != ok {
		t.Errorf("%d readings stored, but %d were acknowledged", len(rs), ok)
	}
	conn2, _ := grpc.NewClient(r.addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(tokens["A2"])))
	defer conn2.Close()
	other, _ := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: "A2"})
	if _, err := rpcpb.NewStationServiceClient(conn2).SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sess.SessionId,
		BenchId: other.Bench.BenchId, ReadingId: "calm", Values: map[string]*pb.Quantity{"current": q(1, "A"), "force": q(0.48, "N")}}); err != nil {
		t.Errorf("another bench was held back: %v", err)
	}
}

// TestStationHeldNotRefused: a station a little over its rate is slowed to
// the rate, not refused; one flooding from several callers gets its
// refusals no faster than one per hold per caller, so it cannot make the
// server spend itself on refusing.
func TestStationHeldNotRefused(t *testing.T) {
	r := startRigWith(t, Config{StationRate: 20, StationBurst: 1, StationHold: 100 * time.Millisecond})
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	join, err := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: "A1"})
	if err != nil {
		t.Fatal(err)
	}
	conn, _ := grpc.NewClient(r.addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(join.StationToken)))
	defer conn.Close()
	st := rpcpb.NewStationServiceClient(conn)
	send := func(id string) error {
		_, err := st.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sess.SessionId, BenchId: benches[0].BenchId,
			ReadingId: id, Values: map[string]*pb.Quantity{"current": q(1, "A"), "force": q(0.48, "N")}})
		return err
	}
	start := time.Now()
	for i := 0; i < 10; i++ {
		if err := send(fmt.Sprintf("paced-%d", i)); err != nil {
			t.Fatalf("reading %d one after another at twice the rate: %v", i, err)
		}
	}
	// Nine waits of a twentieth of a second at least.
	if d := time.Since(start); d < 400*time.Millisecond {
		t.Errorf("ten readings over a 20/s limit took %v; they were not paced", d)
	}

	var tried, refused atomic.Int64
	fctx, cancel := context.WithTimeout(ctx, time.Second)
	defer cancel()
	var wg sync.WaitGroup
	for c := 0; c < 4; c++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := 0; fctx.Err() == nil; k++ {
				err := send(fmt.Sprintf("flood-%d-%d", c, k))
				tried.Add(1)
				if status.Code(err) == codes.ResourceExhausted {
					refused.Add(1)
				}
			}
		}()
	}
	wg.Wait()
	// At most 20 stored and 4 callers × 10 holds refused in the second,
	// where an unheld limit answers thousands of calls.
	if n := tried.Load(); n > 100 || refused.Load() == 0 {
		t.Errorf("a station flooding from 4 callers for 1 s made %d calls, %d refused; want at most about 60, some refused", n, refused.Load())
	}
}
