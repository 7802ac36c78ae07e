package server

import (
	"context"
	"fmt"
	"maps"
	"net"
	"slices"
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

// addStaff creates a staff account with the administrator's key and
// returns its id and key.
func addStaff(t *testing.T, r *rig, name string, roles map[string]pb.StaffRole) (uint64, string) {
	t.Helper()
	req := &pb.AddStaffRequest{Name: name}
	for _, c := range slices.Sorted(maps.Keys(roles)) {
		req.Roles = append(req.Roles, &pb.CourseRole{Course: c, Role: roles[c]})
	}
	res, err := rpcpb.NewStaffServiceClient(r.conn).AddStaff(context.Background(), req)
	if err != nil {
		t.Fatal(err)
	}
	return res.Staff.StaffId, res.Key
}

// dialAs is a connection that sends tok with every call.
func dialAs(t *testing.T, r *rig, tok string) *grpc.ClientConn {
	t.Helper()
	c, err := grpc.NewClient(r.addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(tok)))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

const (
	instructor = pb.StaffRole_STAFF_ROLE_INSTRUCTOR
	assistant  = pb.StaffRole_STAFF_ROLE_ASSISTANT
)

// TestAuthorizationMatrix calls every RPC as every kind of caller: no
// credential, a forged token, the administrator, an instructor and an
// assistant of the session's course and of another course, a revoked
// assistant, a station on its own bench and one on another bench; then
// again after the session is closed.
func TestAuthorizationMatrix(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	sid, own, course := sess.SessionId, benches[0].BenchId, sess.Course
	// A session of the same course to close, and one of another course.
	toClose, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: "to close", Course: course})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: "other", Course: "PHY 118"}); err != nil {
		t.Fatal(err)
	}
	join := func(label string) string {
		res, err := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: label})
		if err != nil {
			t.Fatal(err)
		}
		return res.StationToken
	}
	ownTok, otherTok := join("A1"), join("A2")
	_, instrKey := addStaff(t, r, "Rosalind Achterberg", map[string]pb.StaffRole{course: instructor})
	_, asstKey := addStaff(t, r, "Teo Vasquez-Lind", map[string]pb.StaffRole{course: assistant})
	_, instrOther := addStaff(t, r, "Ilse Marchetti", map[string]pb.StaffRole{"PHY 118": instructor})
	_, asstOther := addStaff(t, r, "Kwame Desrosiers", map[string]pb.StaffRole{"PHY 118": assistant})
	revokedID, revokedKey := addStaff(t, r, "Pavla Oyelaran", map[string]pb.StaffRole{course: assistant})
	spareID, _ := addStaff(t, r, "Yusuf Lindqvist", map[string]pb.StaffRole{course: assistant})
	if _, err := rpcpb.NewStaffServiceClient(r.conn).RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: revokedID}); err != nil {
		t.Fatal(err)
	}
	roles := []string{"none", "forged", "admin", "instructor", "assistant", "instructor-other", "assistant-other", "revoked", "station-own", "station-other"}
	conns := map[string]*grpc.ClientConn{}
	for role, tok := range map[string]string{"none": "", "forged": ownTok[:len(ownTok)-2] + "xx", "admin": testKey,
		"instructor": instrKey, "assistant": asstKey, "instructor-other": instrOther, "assistant-other": asstOther,
		"revoked": revokedKey, "station-own": ownTok, "station-other": otherTok} {
		conns[role] = dialAs(t, r, tok)
	}

	values := map[string]*pb.Quantity{"current": q(1, "A"), "force": q(0.48, "N")}
	n := 0
	// A call's expected answer for each caller, where it is not denied by
	// default: "ok", or the code. Stations and the callers with no valid
	// key are Unauthenticated on every staff call; staff of another course
	// PermissionDenied on a session of this one.
	type call struct {
		name string
		do   func(c *grpc.ClientConn) error
		want map[string]string
	}
	const ok, denied, unauth = "ok", "PermissionDenied", "Unauthenticated"
	public := map[string]string{"none": ok, "forged": ok, "admin": ok, "instructor": ok, "assistant": ok, "instructor-other": ok,
		"assistant-other": ok, "revoked": ok, "station-own": ok, "station-other": ok}
	station := func(assistantToo bool) map[string]string {
		m := map[string]string{"admin": ok, "instructor": ok, "assistant": denied, "station-own": ok, "station-other": denied}
		if assistantToo {
			m["assistant"] = ok
		}
		return m
	}
	both := map[string]string{"admin": ok, "instructor": ok, "assistant": ok}
	instructorOnly := map[string]string{"admin": ok, "instructor": ok, "assistant": denied}
	anyStaff := map[string]string{"admin": ok, "instructor": ok, "assistant": ok, "instructor-other": ok, "assistant-other": ok}
	st := func(f func(rpcpb.StationServiceClient) error) func(*grpc.ClientConn) error {
		return func(c *grpc.ClientConn) error { return f(rpcpb.NewStationServiceClient(c)) }
	}
	in := func(f func(rpcpb.InstructorServiceClient) error) func(*grpc.ClientConn) error {
		return func(c *grpc.ClientConn) error { return f(rpcpb.NewInstructorServiceClient(c)) }
	}
	sf := func(f func(rpcpb.StaffServiceClient) error) func(*grpc.ClientConn) error {
		return func(c *grpc.ClientConn) error { return f(rpcpb.NewStaffServiceClient(c)) }
	}
	calls := []call{
		{"JoinBench", st(func(c rpcpb.StationServiceClient) error {
			_, err := c.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: "A1"})
			return err
		}), public},
		{"ListExperiments", st(func(c rpcpb.StationServiceClient) error {
			_, err := c.ListExperiments(ctx, &pb.ListExperimentsRequest{})
			return err
		}), public},
		{"SubmitReading", st(func(c rpcpb.StationServiceClient) error {
			n++
			_, err := c.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: own,
				ReadingId: "m" + string(rune('a'+n%26)) + string(rune('a'+n/26)), Values: values})
			return err
		}), station(false)},
		{"GetBenchState", st(func(c rpcpb.StationServiceClient) error {
			_, err := c.GetBenchState(ctx, &pb.GetBenchStateRequest{SessionId: sid, BenchId: own})
			return err
		}), station(true)},
		{"CreateSession", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.CreateSession(ctx, &pb.CreateSessionRequest{Title: "x", Course: course})
			return err
		}), instructorOnly},
		{"ListSessions", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.ListSessions(ctx, &pb.ListSessionsRequest{})
			return err
		}), anyStaff},
		{"SetBenches", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sid})
			return err
		}), instructorOnly},
		{"WatchRoom", in(func(c rpcpb.InstructorServiceClient) error {
			s, err := c.WatchRoom(ctx, &pb.WatchRoomRequest{SessionId: sid})
			if err != nil {
				return err
			}
			_, err = s.Recv()
			return err
		}), both},
		{"GetBenchDetail", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.GetBenchDetail(ctx, &pb.GetBenchDetailRequest{SessionId: sid, BenchId: own})
			return err
		}), both},
		{"UpdateSession", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.UpdateSession(ctx, &pb.UpdateSessionRequest{SessionId: sid})
			return err
		}), instructorOnly},
		{"AddNote", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.AddNote(ctx, &pb.AddNoteRequest{SessionId: sid, BenchId: own, Text: "n"})
			return err
		}), both},
		{"AcknowledgeAlert", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.AcknowledgeAlert(ctx, &pb.AcknowledgeAlertRequest{SessionId: sid, BenchId: own})
			return err
		}), both},
		{"SetGradingPolicy", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.SetGradingPolicy(ctx, &pb.SetGradingPolicyRequest{SessionId: sid})
			return err
		}), instructorOnly},
		{"OverrideGrade", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.OverrideGrade(ctx, &pb.OverrideGradeRequest{SessionId: sid, BenchId: own, Points: 1, Reason: "r"})
			return err
		}), instructorOnly},
		// An instructor of another course backs up that course: allowed,
		// and TestStaffScope checks what the copy holds.
		{"Backup", in(func(c rpcpb.InstructorServiceClient) error {
			s, err := c.Backup(ctx, &pb.BackupRequest{})
			if err != nil {
				return err
			}
			_, err = s.Recv()
			return err
		}), map[string]string{"admin": ok, "instructor": ok, "assistant": denied, "instructor-other": ok}},
		{"CloseSession", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.CloseSession(ctx, &pb.CloseSessionRequest{SessionId: toClose.Session.SessionId})
			return err
		}), instructorOnly},
		{"Export", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.Export(ctx, &pb.ExportRequest{SessionId: sid, Format: pb.ExportFormat_EXPORT_FORMAT_JSON})
			return err
		}), both},
		{"SetGroupMembers", in(func(c rpcpb.InstructorServiceClient) error {
			_, err := c.SetGroupMembers(ctx, &pb.SetGroupMembersRequest{SessionId: sid, BenchId: own, Members: "Ines, Oren"})
			return err
		}), both},
		{"AddStaff", sf(func(c rpcpb.StaffServiceClient) error {
			n++
			_, err := c.AddStaff(ctx, &pb.AddStaffRequest{Name: fmt.Sprintf("Helper %d", n), Roles: []*pb.CourseRole{{Course: course, Role: assistant}}})
			return err
		}), instructorOnly},
		{"ListStaff", sf(func(c rpcpb.StaffServiceClient) error {
			_, err := c.ListStaff(ctx, &pb.ListStaffRequest{})
			return err
		}), map[string]string{"admin": ok, "instructor": ok, "assistant": denied, "instructor-other": ok}},
		{"RotateStaffKey", sf(func(c rpcpb.StaffServiceClient) error {
			_, err := c.RotateStaffKey(ctx, &pb.RotateStaffKeyRequest{StaffId: spareID})
			return err
		}), instructorOnly},
		{"RevokeStaff", sf(func(c rpcpb.StaffServiceClient) error {
			_, err := c.RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: spareID})
			return err
		}), instructorOnly},
		{"WhoAmI", sf(func(c rpcpb.StaffServiceClient) error {
			_, err := c.WhoAmI(ctx, &pb.WhoAmIRequest{})
			return err
		}), anyStaff},
	}
	cells := 0
	for _, c := range calls {
		for _, role := range roles {
			cells++
			want, set := c.want[role]
			if !set {
				switch role {
				case "instructor-other", "assistant-other":
					want = denied
				default:
					want = unauth
				}
			}
			code := status.Code(c.do(conns[role]))
			got := code.String()
			if code != codes.Unauthenticated && code != codes.PermissionDenied {
				got = ok // allowed: the call ran, whatever it then answered
			}
			if got != want {
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
	if code := status.Code(calls[2].do(conns["admin"])); code != codes.FailedPrecondition {
		t.Errorf("SubmitReading on a closed session as the administrator: %v, want FailedPrecondition", code)
	}
	t.Logf("authorization matrix: %d cells (%d RPCs × %d callers, plus 3 on a closed session)", cells, len(calls), len(roles))
}

// TestGeneratedKeyIsShownOnceAndStoredHashed: with no key given, the first
// start makes one; the file holds only its hash, and a restart shows none.
func TestGeneratedKeyIsShownOnceAndStoredHashed(t *testing.T) {
	r := startRigWith(t, Config{AdminKey: "k-1"})
	hash, _, err := r.db.Credentials(func() []byte { return nil })
	if err != nil || string(hash) == "k-1" || len(hash) != 32 {
		t.Errorf("stored %q, %v; want a 32-byte hash, never the key", hash, err)
	}
	// A fresh server on the same file with no key: it keeps the stored one.
	srv, err := New(Config{DB: r.db, Logger: r.srv.log})
	if err != nil {
		t.Fatal(err)
	}
	if srv.ShownKey() != "" || !srv.auth.isAdmin("k-1") {
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
