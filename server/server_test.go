package server

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"math"
	"net"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/google/go-cmp/cmp"
	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/internal/bearer"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

// testKey is the administrator's key of the test servers.
const testKey = "test-instructor-key-0123456789"

type rig struct {
	srv        *Server
	db         *store.DB
	station    rpcpb.StationServiceClient
	instructor rpcpb.InstructorServiceClient
	health     healthpb.HealthClient
	addr       string
	// conn is the client's connection, with the administrator's key.
	conn *grpc.ClientConn
}

// startRig runs a real Server on a loopback port with a bbolt file in a temp
// dir, and a native gRPC client connected to it.
func startRig(t testing.TB) *rig {
	t.Helper()
	clock := time.Date(2026, 3, 4, 14, 0, 0, 0, time.UTC)
	var mu sync.Mutex
	return startRigWith(t, Config{Now: func() time.Time {
		mu.Lock()
		defer mu.Unlock()
		clock = clock.Add(time.Second)
		return clock
	}})
}

// startRigWith is startRig with the given clock and room settings.
func startRigWith(t testing.TB, cfg Config) *rig {
	t.Helper()
	return startRigPrepared(t, cfg, nil)
}

// startRigPrepared is startRigWith that calls prepare, when set, on the
// server before it serves (a failpoints build's tests install hooks there).
func startRigPrepared(t testing.TB, cfg Config, prepare func(*Server)) *rig {
	t.Helper()
	db, err := store.Open(filepath.Join(t.TempDir(), "fluxroom.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	cfg.DB = db
	if cfg.Logger == nil {
		cfg.Logger = slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	if cfg.AdminKey == "" {
		cfg.AdminKey = testKey
	}
	srv, err := New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	if prepare != nil {
		prepare(srv)
	}
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	served := make(chan error, 1)
	go func() { served <- srv.Serve(l) }()
	conn, err := grpc.NewClient(l.Addr().String(), grpc.WithTransportCredentials(insecure.NewCredentials()),
		grpc.WithPerRPCCredentials(bearer.Token(cfg.AdminKey)))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		conn.Close()
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		defer cancel()
		srv.Shutdown(ctx)
		if err := <-served; err != nil {
			t.Errorf("Serve: %v", err)
		}
		if err := db.Check(); err != nil {
			t.Error(err)
		}
		db.Close()
	})
	return &rig{db: db, station: rpcpb.NewStationServiceClient(conn), instructor: rpcpb.NewInstructorServiceClient(conn),
		health: healthpb.NewHealthClient(conn), addr: l.Addr().String(), srv: srv, conn: conn}
}

func q(v float64, unit string) *pb.Quantity { return &pb.Quantity{Value: v, Unit: unit} }

func forceBench(label string, row, col int32) *pb.Bench {
	return &pb.Bench{Label: label, Row: row, Column: col, Experiment: "coil_force", Constants: map[string]*pb.Quantity{
		"turns": q(100, "1"), "segment_length": q(4, "cm"), "gap_field": q(0.12, "T")}}
}

// setupRoom creates a session with two benches and returns it with them.
func setupRoom(t *testing.T, r *rig) (*pb.Session, []*pb.Bench) {
	t.Helper()
	ctx := context.Background()
	cs, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: "PHY 112 · Thursday"})
	if err != nil {
		t.Fatal(err)
	}
	sb, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: cs.Session.SessionId,
		Benches: []*pb.Bench{forceBench("A1", 0, 0), forceBench("A2", 0, 1)}})
	if err != nil {
		t.Fatal(err)
	}
	return cs.Session, sb.Benches
}

func submit(ctx context.Context, r *rig, sid, bid uint64, id string, current, force float64) (*pb.SubmitReadingResponse, error) {
	return r.station.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: bid, ReadingId: id,
		Values: map[string]*pb.Quantity{"current": q(current, "A"), "force": q(force, "N")}})
}

// stateNow is a bench's full state as the instructor reads it now.
func stateNow(t *testing.T, r *rig, sid, bid uint64) *pb.BenchState {
	t.Helper()
	d, err := r.instructor.GetBenchDetail(context.Background(), &pb.GetBenchDetailRequest{SessionId: sid, BenchId: bid})
	if err != nil {
		t.Fatal(err)
	}
	return d.Detail.State
}

func TestJoinSubmitWatch(t *testing.T) {
	r := startRig(t)
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	sess, benches := setupRoom(t, r)

	join, err := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: "a2"})
	if err != nil {
		t.Fatal(err)
	}
	if join.Bench.BenchId != benches[1].BenchId {
		t.Errorf("joined bench %d, want %d", join.Bench.BenchId, benches[1].BenchId)
	}

	stream, err := r.instructor.WatchRoom(ctx, &pb.WatchRoomRequest{SessionId: sess.SessionId})
	if err != nil {
		t.Fatal(err)
	}
	first, err := stream.Recv()
	if err != nil {
		t.Fatal(err)
	}
	snap := first.GetSnapshot()
	if first.Sequence != 1 || snap == nil || len(snap.Benches) != 2 {
		t.Fatalf("first event = %v, want a snapshot of 2 benches with sequence 1", first)
	}
	if got := snap.Benches[1].Verdict; got != pb.Verdict_VERDICT_NEED_DATA {
		t.Errorf("snapshot verdict = %v, want NEED_DATA", got)
	}

	// A skipped zero: F = 0.48·I + 0.8 N.
	for i, I := range []float64{0, 1, 2, 3, 4} {
		_, err = submit(ctx, r, sess.SessionId, join.Bench.BenchId, "r"+string(rune('a'+i)), I, 0.48*I+0.8+0.002*float64(i%2))
		if err != nil {
			t.Fatal(err)
		}
	}
	last := stateNow(t, r, sess.SessionId, join.Bench.BenchId)
	if got := last.Verdict; got != pb.Verdict_VERDICT_CHECK {
		t.Errorf("verdict = %v (%s), want CHECK", got, last.Reason)
	}
	if len(last.Diagnoses) == 0 || last.Diagnoses[0].Code != "coil_force.sensor_not_zeroed" {
		t.Errorf("diagnoses = %v, want coil_force.sensor_not_zeroed", last.Diagnoses)
	}

	// The bench's events follow the snapshot, numbered from 2, one per
	// judging pass (readings that arrive together are judged together),
	// until the one with all five readings, which matches the bench's state.
	var got *pb.BenchState
	for want := uint64(2); got.GetReadingCount() < 5; want++ {
		ev, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if ev.Sequence != want {
			t.Errorf("event sequence = %d, want %d", ev.Sequence, want)
		}
		if b := changedBench(ev, benchID(join.Bench.BenchId)); b != nil {
			got = b
		}
	}
	if got.GetReason() != last.Reason {
		t.Errorf("last event = %v, want bench %d with reason %q", got, join.Bench.BenchId, last.Reason)
	}

	// A retry of the same reading (its id and values) stores nothing new;
	// other values under the id are refused (TestReusedReadingIDWithOtherValues).
	I := 4.0 // as the loop above computed it, in float64 arithmetic
	again, err := submit(ctx, r, sess.SessionId, join.Bench.BenchId, "re", I, 0.48*I+0.8+0.002*float64(4%2))
	if err != nil {
		t.Fatal(err)
	}
	if n := stateNow(t, r, sess.SessionId, join.Bench.BenchId).ReadingCount; !again.Duplicate || n != 5 {
		t.Errorf("retry: duplicate = %v, readings = %d; want true, 5", again.Duplicate, n)
	}

	detail, err := r.instructor.GetBenchDetail(ctx, &pb.GetBenchDetailRequest{SessionId: sess.SessionId, BenchId: join.Bench.BenchId})
	if err != nil {
		t.Fatal(err)
	}
	if len(detail.Detail.Readings) != 5 || detail.Detail.Fit.GetPoints() != 5 {
		t.Errorf("detail has %d readings, fit of %d points; want 5 and 5", len(detail.Detail.Readings), detail.Detail.Fit.GetPoints())
	}
	if math.Abs(detail.Detail.Fit.GetIntercept()-0.8) > 0.01 {
		t.Errorf("fit intercept = %g N, want ≈ 0.8", detail.Detail.Fit.GetIntercept())
	}
	// The room's judging draws no plot; the detail draws one, a point per
	// reading.
	if n := len(detail.Detail.GetPlot().GetPoints()); n != 5 {
		t.Errorf("detail plot has %d points, want 5", n)
	}

	h, err := r.health.Check(ctx, &healthpb.HealthCheckRequest{})
	if err != nil || h.Status != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("health = %v, %v; want SERVING", h, err)
	}
}

// fieldOf returns the fields named by an InvalidArgument status.
func fieldsOf(t *testing.T, err error) []string {
	t.Helper()
	if code := status.Code(err); code != codes.InvalidArgument {
		t.Fatalf("code = %v (%v), want InvalidArgument", code, err)
	}
	return detailFields(err)
}

// detailFields are the fields a status's BadRequest details name.
func detailFields(err error) []string {
	var fields []string
	for _, d := range status.Convert(err).Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, v := range br.FieldViolations {
				fields = append(fields, v.Field)
			}
		}
	}
	return fields
}

func TestBadInputIsRejectedAndNotStored(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	sid, bid := sess.SessionId, benches[0].BenchId
	values := func(edit func(map[string]*pb.Quantity)) map[string]*pb.Quantity {
		m := map[string]*pb.Quantity{"current": q(1, "A"), "force": q(0.48, "N")}
		edit(m)
		return m
	}
	negTurns := forceBench("A3", 1, 0)
	negTurns.Constants["turns"] = q(-10, "1")
	for _, tc := range []struct {
		name      string
		call      func() error
		wantField string
	}{
		{"NaN force", func() error {
			_, err := r.station.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: bid, ReadingId: "x1",
				Values: values(func(m map[string]*pb.Quantity) { m["force"] = q(math.NaN(), "N") })})
			return err
		}, `values["force"].value`},
		{"missing unit", func() error {
			_, err := r.station.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: bid, ReadingId: "x2",
				Values: values(func(m map[string]*pb.Quantity) { m["current"] = &pb.Quantity{Value: 1} })})
			return err
		}, `values["current"].unit`},
		{"unknown bench", func() error {
			_, err := r.station.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: 4242, ReadingId: "x3",
				Values: values(func(map[string]*pb.Quantity) {})})
			return err
		}, "bench_id"},
		{"empty reading id", func() error {
			_, err := r.station.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: bid,
				Values: values(func(map[string]*pb.Quantity) {})})
			return err
		}, "reading_id"},
		{"negative turn count", func() error {
			_, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sid, Benches: []*pb.Bench{negTurns}})
			return err
		}, `benches[0].constants["turns"].value`},
		{"duplicate label", func() error {
			_, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sid, Benches: []*pb.Bench{forceBench("A1", 2, 2)}})
			return err
		}, "benches[0].label"},
		{"wrong join code", func() error {
			_, err := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: "NOPE99", BenchLabel: "A1"})
			return err
		}, "join_code"},
		{"unknown bench label", func() error {
			_, err := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: "Z9"})
			return err
		}, "bench_label"},
		{"empty title", func() error {
			_, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: "  "})
			return err
		}, "title"},
		{"unknown session to watch", func() error {
			s, err := r.instructor.WatchRoom(ctx, &pb.WatchRoomRequest{SessionId: 77})
			if err != nil {
				return err
			}
			_, err = s.Recv()
			return err
		}, "session_id"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			fields := fieldsOf(t, tc.call())
			if !contains(fields, tc.wantField) {
				t.Errorf("violations name %v, want %s", fields, tc.wantField)
			}
		})
	}
	// Nothing was stored: no readings, the same two benches, one session.
	for _, b := range benches {
		_, rs, err := r.db.BenchReadings(sid, b.BenchId)
		if err != nil || len(rs) != 0 {
			t.Errorf("bench %s has %d readings (%v), want 0", b.Label, len(rs), err)
		}
	}
	got, _ := r.db.Benches(sid)
	if len(got) != 2 {
		t.Errorf("session has %d benches, want 2", len(got))
	}
	ss, _ := r.db.Sessions()
	if diff := cmp.Diff(len(ss), 1); diff != "" {
		t.Errorf("sessions (-got +want): %s", diff)
	}
}

func contains(xs []string, x string) bool {
	for _, v := range xs {
		if v == x {
			return true
		}
	}
	return false
}

// TestRoomFindingsAndStalls: when most groups share one discrepancy the room
// stream carries a shared-cause finding, and a bench that stops while the
// others go on is marked stalled by itself, beside its verdict, and one
// whose run is complete is marked done.
func TestRoomFindingsAndStalls(t *testing.T) {
	var mu sync.Mutex
	now := time.Date(2026, 3, 4, 14, 0, 0, 0, time.UTC)
	clock := func() time.Time { mu.Lock(); defer mu.Unlock(); return now }
	advance := func(d time.Duration) { mu.Lock(); now = now.Add(d); mu.Unlock() }
	r := startRigWith(t, Config{Now: clock, StallAfter: 5 * time.Minute, StallCheck: 10 * time.Millisecond})
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	cs, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: "room rules"})
	if err != nil {
		t.Fatal(err)
	}
	sid := cs.Session.SessionId
	var benches []*pb.Bench
	for i, label := range []string{"A1", "A2", "A3", "A4"} {
		b := forceBench(label, 0, int32(i))
		// Every bench's L was set to both segments (8 cm) by the same handout.
		b.Constants["segment_length"] = q(8, "cm")
		benches = append(benches, b)
	}
	sb, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sid, Benches: benches})
	if err != nil {
		t.Fatal(err)
	}
	stream := watchPastSnapshot(t, r, sid)
	for j, b := range sb.Benches[:3] {
		for i, I := range []float64{0, 1, 2, 3, 4} {
			noise := 0.002 * float64((i+j)%3)
			if _, err := submit(ctx, r, sid, b.BenchId, fmt.Sprintf("%s-%d", b.Label, i), I, 0.48*I+noise); err != nil {
				t.Fatal(err)
			}
		}
	}
	var finding *pb.RoomFinding
	for finding == nil {
		ev, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range ev.GetChanges().GetFindings().GetFindings() {
			finding = f
		}
	}
	if finding.Code != "room.shared_cause" || len(finding.BenchIds) != 3 || math.Abs(finding.MedianRatio-0.5) > 0.01 {
		t.Errorf("finding = %v, want room.shared_cause over 3 benches at ×0.5", finding)
	}
	// Ten minutes on, A1 reads again and A2 does not: A2 is stalled, and
	// keeps its verdict (off: L counts both segments); its 5 readings are
	// fewer than the 8 of a complete coil run.
	advance(10 * time.Minute)
	if _, err := submit(ctx, r, sid, sb.Benches[0].BenchId, "A1-late", 4.5, 0.48*4.5); err != nil {
		t.Fatal(err)
	}
	for {
		ev, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if b := changedBench(ev, benchLabel("A2")); b != nil && b.Activity != "" {
			if b.Activity != "stalled" || b.Verdict != pb.Verdict_VERDICT_OFF {
				t.Errorf("A2 quiet: activity %q, verdict %v; want stalled and still off", b.Activity, b.Verdict)
			}
			break
		}
	}
	// A4 finishes a complete run (8 readings), then stops while A1 goes on:
	// it is done, not stalled.
	for i := 0; i < 8; i++ {
		I := float64(i) * 0.5
		if _, err := submit(ctx, r, sid, sb.Benches[3].BenchId, fmt.Sprintf("A4-%d", i), I, 0.24*I); err != nil {
			t.Fatal(err)
		}
	}
	advance(10 * time.Minute)
	if _, err := submit(ctx, r, sid, sb.Benches[0].BenchId, "A1-later", 4.6, 0.48*4.6); err != nil {
		t.Fatal(err)
	}
	for {
		ev, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if b := changedBench(ev, benchLabel("A4")); b != nil && b.Activity != "" {
			if b.Activity != "done" {
				t.Errorf("A4 after a complete run: activity %q, want done", b.Activity)
			}
			break
		}
	}
	// A policy that asks 5 readings of a coil run makes quiet A2 done, and
	// the room shows it without another reading. (Events sent before a
	// change may still be on their way: each wait is for the new state.)
	if _, err := r.instructor.SetGradingPolicy(ctx, &pb.SetGradingPolicyRequest{SessionId: sid,
		PolicyJson: `{"required_readings": {"coil_force": 5}}`}); err != nil {
		t.Fatal(err)
	}
	lastA2 := "(none)"
	for lastA2 != "done" {
		ev, err := stream.Recv()
		if err != nil {
			t.Fatalf("A2 not shown done under a policy of 5 readings (last shown %q): %v", lastA2, err)
		}
		if b := changedBench(ev, benchLabel("A2")); b != nil {
			lastA2 = b.Activity
		}
	}
	// A good band of 60 % takes in ×0.5: the shared cause is gone from the
	// watchers' room, not only from the next snapshot.
	if _, err := r.instructor.UpdateSession(ctx, &pb.UpdateSessionRequest{SessionId: sid,
		Tolerance: &pb.Tolerance{GoodPercent: 60, AcceptablePercent: 70}}); err != nil {
		t.Fatal(err)
	}
	var last []*pb.RoomFinding
	for {
		ev, err := stream.Recv()
		if err != nil {
			t.Fatalf("no room findings without the shared cause under a good band of 60 %% (last sent: %v): %v", last, err)
		}
		if f := ev.GetChanges().GetFindings(); f != nil {
			if last = f.Findings; len(last) == 0 {
				break
			}
		}
	}
}

// watchPastSnapshot opens a room stream on the session and reads its
// snapshot: what comes next are the room's changes.
func watchPastSnapshot(t *testing.T, r *rig, sessionID uint64) rpcpb.InstructorService_WatchRoomClient {
	t.Helper()
	stream, err := r.instructor.WatchRoom(context.Background(), &pb.WatchRoomRequest{SessionId: sessionID})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := stream.Recv(); err != nil {
		t.Fatal(err)
	}
	return stream
}

// changedBench is the state, among a room event's changes, of the bench
// that is picks; nil when the event has none.
func changedBench(ev *pb.WatchRoomResponse, is func(*pb.BenchState) bool) *pb.BenchState {
	for _, b := range ev.GetChanges().GetBenches() {
		if is(b) {
			return b
		}
	}
	return nil
}

func benchID(id uint64) func(*pb.BenchState) bool {
	return func(b *pb.BenchState) bool { return b.GetBench().GetBenchId() == id }
}

func benchLabel(label string) func(*pb.BenchState) bool {
	return func(b *pb.BenchState) bool { return b.GetBench().GetLabel() == label }
}

// syncBuffer is a log sink the server's goroutines may write concurrently.
type syncBuffer struct {
	mu sync.Mutex
	b  strings.Builder
}

func (b *syncBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.b.Write(p)
}

func (b *syncBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.b.String()
}

// TestRequestIDHeader: a caller gets the id of its call when the server has
// logged something under it: a failed call, or any call at debug level.
func TestRequestIDHeader(t *testing.T) {
	for _, tc := range []struct {
		name               string
		level              slog.Level
		bad                bool
		wantHeader, logged bool
	}{
		{name: "info, accepted", level: slog.LevelInfo},
		{name: "info, rejected", level: slog.LevelInfo, bad: true, wantHeader: true},
		{name: "debug, accepted", level: slog.LevelDebug, wantHeader: true, logged: true},
		{name: "debug, rejected", level: slog.LevelDebug, bad: true, wantHeader: true, logged: true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			var logs syncBuffer
			r := startRigWith(t, Config{Logger: slog.New(slog.NewTextHandler(&logs, &slog.HandlerOptions{Level: tc.level}))})
			sess, benches := setupRoom(t, r)
			current := 1.0
			if tc.bad {
				current = math.NaN()
			}
			var md metadata.MD
			_, err := r.station.SubmitReading(context.Background(), &pb.SubmitReadingRequest{SessionId: sess.SessionId,
				BenchId: benches[0].BenchId, ReadingId: "r1",
				Values: map[string]*pb.Quantity{"current": q(current, "A"), "force": q(0.05, "N")}}, grpc.Header(&md))
			if got, want := status.Code(err), map[bool]codes.Code{false: codes.OK, true: codes.InvalidArgument}[tc.bad]; got != want {
				t.Fatalf("SubmitReading: %v, want %v", err, want)
			}
			ids := md.Get("x-request-id")
			if got := len(ids) == 1 && ids[0] != ""; got != tc.wantHeader {
				t.Fatalf("x-request-id %q, want one: %v", ids, tc.wantHeader)
			}
			if tc.logged && !strings.Contains(logs.String(), "request_id="+ids[0]) {
				t.Errorf("no log line names request %q:\n%s", ids[0], logs.String())
			}
		})
	}
}

// TestShutdownTwice: Shutdown may be called again and from several
// goroutines at once (a signal handler and a test's cleanup both stop the
// server); every call returns the first one's result and nothing panics.
func TestShutdownTwice(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	if _, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: "Kestrel Vale · PHY 142 · shutdown"}); err != nil {
		t.Fatal(err)
	}
	var wg sync.WaitGroup
	errs := make([]error, 4)
	for i := range errs {
		wg.Add(1)
		go func() {
			defer wg.Done()
			c, cancel := context.WithTimeout(ctx, 2*time.Second)
			defer cancel()
			errs[i] = r.srv.Shutdown(c)
		}()
	}
	wg.Wait()
	for i, err := range errs {
		if err != nil {
			t.Errorf("concurrent Shutdown %d: %v", i, err)
		}
	}
	if err := r.srv.Shutdown(ctx); err != nil {
		t.Errorf("Shutdown after Shutdown: %v", err)
	}
}

// TestShutdownWithIdleConnections: connections that never say what they
// are (a TCP connection that sends nothing, a gRPC client that opened its
// HTTP/2 connection but makes no call) must not keep Serve from returning
// after Shutdown; they are closed with the server.
func TestShutdownWithIdleConnections(t *testing.T) {
	db, err := store.Open(filepath.Join(t.TempDir(), "fluxroom.db"), store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	srv, err := New(Config{DB: db, Logger: slog.New(slog.NewTextHandler(io.Discard, nil)), AdminKey: testKey})
	if err != nil {
		t.Fatal(err)
	}
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	served := make(chan error, 1)
	go func() { served <- srv.Serve(l) }()
	silent, err := net.Dial("tcp", l.Addr().String())
	if err != nil {
		t.Fatal(err)
	}
	defer silent.Close()
	// An HTTP/2 client preface and SETTINGS, then nothing: what an idle
	// gRPC channel sends.
	preface, err := net.Dial("tcp", l.Addr().String())
	if err != nil {
		t.Fatal(err)
	}
	defer preface.Close()
	preface.Write([]byte("PRI * HTTP/2.0\r\n\r\nSM\r\n\r\n\x00\x00\x00\x04\x00\x00\x00\x00\x00"))
	time.Sleep(100 * time.Millisecond) // let the server accept both
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer cancel()
	if err := srv.Shutdown(ctx); err != nil {
		t.Errorf("Shutdown: %v", err)
	}
	select {
	case err := <-served:
		if err != nil {
			t.Errorf("Serve: %v", err)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("Serve did not return within 5 s of Shutdown with idle connections open")
	}
}

// TestReusedReadingIDWithOtherValues: a retry (same id, same values) is a
// duplicate that stores nothing; the same id with other values is refused
// with AlreadyExists on reading_id, and the stored reading stays as it was.
func TestReusedReadingIDWithOtherValues(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	sid, bid := sess.SessionId, benches[0].BenchId
	if _, err := submit(ctx, r, sid, bid, "same-id", 1, 0.48); err != nil {
		t.Fatal(err)
	}
	res, err := submit(ctx, r, sid, bid, "same-id", 1, 0.48)
	if err != nil || !res.Duplicate {
		t.Fatalf("retry: %v, %+v; want a duplicate", err, res)
	}
	_, err = submit(ctx, r, sid, bid, "same-id", 2, 0.96)
	if status.Code(err) != codes.AlreadyExists || !contains(detailFields(err), "reading_id") {
		t.Fatalf("other values under the same id: %v; want AlreadyExists on reading_id", err)
	}
	_, rs, err := r.db.BenchReadings(sid, bid)
	if err != nil {
		t.Fatal(err)
	}
	if len(rs) != 1 || rs[0].Values.At("current").Value != 1 {
		t.Errorf("stored after the refusal: %+v; want the first reading alone, unchanged", rs)
	}
}
