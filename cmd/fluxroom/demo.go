package main

import (
	"context"
	crand "crypto/rand"
	"encoding/base64"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/domain/sim"
	"example.com/fluxroom/internal/bearer"
	"example.com/fluxroom/internal/wire"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

// The demo class is invented: an invented polytechnic, room and course.
const demoTitle = "Kestrel Vale Polytechnic · PHY 142 magnetism lab · room B-214"

// demoBench is one simulated group at its place in the room.
type demoBench struct {
	label    string
	row, col int32
	group    sim.Group
	// mistake says, in words, what was seeded ("" for a clean group).
	mistake string
}

// demoExperiments gives each column of the room one experiment.
var demoExperiments = []string{"coil_force", "e_over_m", "straight_wire", "solenoid", "flat_coil"}

// demoMistakes seeds mistakes from the catalogue at some benches; the rest
// are clean groups with realistic instrument noise.
var demoMistakes = map[string]string{
	"A1": domain.CodeSensorNotZeroed,
	"C1": domain.CodeLengthDoubled,
	"B2": domain.CodeDiameterAsRadius,
	"C3": domain.CodeWireBackground,
	"A4": domain.CodeProbeAtEnd,
	"B5": domain.CodeCoilWireFormula,
}

// demoUnsafe is the bench whose heater is turned past its limit mid-run.
const demoUnsafe = "A2"

func demoClass(seed uint64) ([]demoBench, error) {
	var out []demoBench
	t0 := time.Date(2026, 3, 5, 13, 30, 0, 0, time.UTC)
	for row := int32(0); row < 3; row++ {
		for col := int32(0); col < int32(len(demoExperiments)); col++ {
			label := fmt.Sprintf("%c%d", 'A'+row, col+1)
			code := demoMistakes[label]
			g, err := sim.Simulate(demoExperiments[col], code, rand.New(rand.NewPCG(seed, uint64(row*10+col))), t0)
			if err != nil {
				return nil, err
			}
			b := demoBench{label: label, row: row, col: col, group: g}
			if code != "" {
				b.mistake = code
			}
			if label == demoUnsafe {
				g.Readings[4].Values.Set("heater_voltage", domain.Quantity{Value: 7.4, Unit: "V"})
				b.mistake = "heater turned up to 7.4 V on the fifth reading (unsafe)"
			}
			out = append(out, b)
		}
	}
	return out, nil
}

func (m *Main) demo(ctx context.Context, args []string) error {
	fs := m.newFlags("demo")
	dataDir := fs.String("data", "fluxroom-data", "directory for the demo's database (created)")
	addr := fs.String("addr", "127.0.0.1:8080", "host:port to listen on")
	pace := fs.Duration("pace", 2*time.Second, "mean time between one bench's readings")
	every := fs.Duration("every", 5*time.Second, "how often to print the room")
	duration := fs.Duration("duration", 0, "stop after this long (0: run until interrupted)")
	seed := fs.Uint64("seed", 2026, "seed of the simulated class")
	level := fs.String("log-level", "warn", "log level: debug, info, warn or error")
	if err := parse(fs, args); err != nil {
		return err
	}
	log, err := m.logger(*level)
	if err != nil {
		return err
	}
	// The demo makes its own administrator's key each run and puts it in the
	// dashboard URL's fragment, which the browser keeps to itself.
	key := newDemoKey()
	r, err := m.start(filepath.Join(*dataDir, "demo.db"), *addr, log, serverOptions{adminKey: key})
	if err != nil {
		return err
	}
	defer r.stop()
	if *duration > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(ctx, *duration)
		defer cancel()
	}

	conn, err := grpc.NewClient(r.addr.String(), grpc.WithTransportCredentials(insecure.NewCredentials()),
		grpc.WithPerRPCCredentials(bearer.Token(key)))
	if err != nil {
		return err
	}
	defer conn.Close()
	// Stations join with the code and use their own token, like a laptop.
	stationConn, err := grpc.NewClient(r.addr.String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		return err
	}
	defer stationConn.Close()
	instructor := rpcpb.NewInstructorServiceClient(conn)
	station := rpcpb.NewStationServiceClient(stationConn)

	class, err := demoClass(*seed)
	if err != nil {
		return err
	}
	sess, err := setUpDemoRoom(ctx, instructor, class)
	if err != nil {
		return err
	}
	asstKey, err := demoAssistant(ctx, rpcpb.NewStaffServiceClient(conn), sess.Course)
	if err != nil {
		return err
	}
	fmt.Fprintf(m.Stdout, "%s\njoin code %s · %d benches\ndashboard: http://%s/?session=%d#key=%s\n", sess.Title, sess.JoinCode, len(class), r.addr, sess.SessionId, key)
	fmt.Fprintf(m.Stdout, "the same room as the course's assistant, %s: http://%s/#key=%s\n", demoAssistantName, r.addr, asstKey)
	fmt.Fprintln(m.Stdout, "Simulated groups with a seeded mistake:")
	for _, b := range class {
		if b.mistake != "" {
			fmt.Fprintf(m.Stdout, "  %s  %s\n", b.label, b.mistake)
		}
	}
	fmt.Fprintln(m.Stdout, "Press Ctrl-C to stop.")

	var wg sync.WaitGroup
	for i, b := range class {
		wg.Add(1)
		benchRNG := rand.New(rand.NewPCG(*seed, uint64(i)))
		go func() {
			defer wg.Done()
			if err := simulateBench(ctx, station, sess.JoinCode, b, *pace, benchRNG); err != nil && ctx.Err() == nil {
				log.Warn("simulated bench stopped", "bench", b.label, "err", err)
			}
		}()
	}
	watchErr := printRoom(ctx, m.Stdout, instructor, sess.SessionId, *every)
	wg.Wait()
	if ctx.Err() != nil {
		return nil
	}
	return watchErr
}

func setUpDemoRoom(ctx context.Context, in rpcpb.InstructorServiceClient, class []demoBench) (*pb.Session, error) {
	cs, err := in.CreateSession(ctx, &pb.CreateSessionRequest{Title: demoTitle})
	if err != nil {
		return nil, fmt.Errorf("create demo session: %w", err)
	}
	var benches []*pb.Bench
	for _, b := range class {
		benches = append(benches, &pb.Bench{Label: b.label, Row: b.row, Column: b.col, Experiment: b.group.Experiment,
			Constants: wire.QuantitiesToPB(b.group.Bench.Constants)})
	}
	if _, err := in.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: cs.Session.SessionId, Benches: benches}); err != nil {
		return nil, fmt.Errorf("set demo benches: %w", err)
	}
	return cs.Session, nil
}

// simulateBench joins like a station laptop and submits the group's
// simulated readings one at a time, at the class's pace.
func simulateBench(ctx context.Context, st rpcpb.StationServiceClient, code string, b demoBench, pace time.Duration, rng *rand.Rand) error {
	if err := sleep(ctx, time.Duration(rng.Float64()*3*float64(pace))); err != nil {
		return err
	}
	join, err := st.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: code, BenchLabel: b.label})
	if err != nil {
		return err
	}
	tctx := metadata.AppendToOutgoingContext(ctx, "authorization", "Bearer "+join.StationToken)
	for i, r := range b.group.Readings {
		req := &pb.SubmitReadingRequest{SessionId: join.SessionId, BenchId: join.Bench.BenchId,
			ReadingId: fmt.Sprintf("demo-%s-%02d", b.label, i), Values: wire.ValuesToPB(r.Values)}
		if err := submitWithRetry(tctx, st, req); err != nil {
			return err
		}
		if err := sleep(ctx, time.Duration((0.6+0.8*rng.Float64())*float64(pace))); err != nil {
			return err
		}
	}
	return nil
}

// demoAssistantName is the demo course's teaching assistant (invented).
const demoAssistantName = "Ines Valdés-Okafor"

// demoAssistant gives the demo course's assistant a key for this run: a
// new account the first time, a new key on the same account after, as a
// department would.
func demoAssistant(ctx context.Context, c rpcpb.StaffServiceClient, course string) (string, error) {
	list, err := c.ListStaff(ctx, &pb.ListStaffRequest{})
	if err != nil {
		return "", fmt.Errorf("demo assistant: %w", err)
	}
	for _, m := range list.Staff {
		if m.Name == demoAssistantName {
			res, err := c.RotateStaffKey(ctx, &pb.RotateStaffKeyRequest{StaffId: m.StaffId})
			if err != nil {
				return "", fmt.Errorf("demo assistant: %w", err)
			}
			return res.Key, nil
		}
	}
	res, err := c.AddStaff(ctx, &pb.AddStaffRequest{Name: demoAssistantName,
		Roles: []*pb.CourseRole{{Course: course, Role: pb.StaffRole_STAFF_ROLE_ASSISTANT}}})
	if err != nil {
		return "", fmt.Errorf("demo assistant: %w", err)
	}
	return res.Key, nil
}

// newDemoKey is a fresh administrator's key for one demo run.
func newDemoKey() string {
	b := make([]byte, 18)
	crand.Read(b)
	return base64.RawURLEncoding.EncodeToString(b)
}

// submitWithRetry resends a reading until the server answers (or, past the
// station's rate limit, until it has room); the reading id makes a resend of
// an already stored reading a no-op.
func submitWithRetry(ctx context.Context, st rpcpb.StationServiceClient, req *pb.SubmitReadingRequest) error {
	for {
		_, err := st.SubmitReading(ctx, req)
		if c := status.Code(err); c != codes.Unavailable && c != codes.ResourceExhausted {
			return err
		}
		if err := sleep(ctx, 200*time.Millisecond); err != nil {
			return err
		}
	}
}

func sleep(ctx context.Context, d time.Duration) error {
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-ctx.Done():
		return ctx.Err()
	case <-t.C:
		return nil
	}
}

// printRoom follows the room stream and prints one line per bench every
// interval, so the demo is useful without a browser.
func printRoom(ctx context.Context, w io.Writer, in rpcpb.InstructorServiceClient, sessionID uint64, every time.Duration) error {
	// The stream ends when ctx does, but must not carry ctx's deadline to the
	// server: a server-side timeout would end it as an error a moment early.
	streamCtx, cancel := context.WithCancel(context.WithoutCancel(ctx))
	defer cancel()
	stop := context.AfterFunc(ctx, cancel)
	defer stop()
	stream, err := in.WatchRoom(streamCtx, &pb.WatchRoomRequest{SessionId: sessionID})
	if err != nil {
		return err
	}
	var mu sync.Mutex
	states := map[uint64]*pb.BenchState{}
	recvErr := make(chan error, 1)
	go func() {
		for {
			ev, err := stream.Recv()
			if err != nil {
				recvErr <- err
				return
			}
			mu.Lock()
			if snap := ev.GetSnapshot(); snap != nil {
				for _, b := range snap.Benches {
					states[b.Bench.BenchId] = b
				}
			}
			for _, b := range ev.GetChanges().GetBenches() {
				states[b.Bench.BenchId] = b
			}
			mu.Unlock()
		}
	}()
	tick := time.NewTicker(every)
	defer tick.Stop()
	shown := map[uint64]string{} // what each bench's last printed line said
	print := func(now time.Time, all bool) {
		mu.Lock()
		defer mu.Unlock()
		if all {
			clear(shown)
		}
		fmt.Fprint(w, roomSummary(now, states, shown))
	}
	for {
		select {
		case <-ctx.Done():
			print(time.Now(), true)
			return nil
		case err := <-recvErr:
			if ctx.Err() != nil || errors.Is(err, io.EOF) {
				print(time.Now(), true)
				return nil
			}
			return fmt.Errorf("room stream: %w", err)
		case now := <-tick.C:
			print(now, false)
		}
	}
}

// roomSummary is one line per bench whose state changed since shown (its
// verdict, readings or reason), in room order; shown is updated. Nothing at
// all when no bench changed, so the terminal shows what happens, not the
// same room again every few seconds.
func roomSummary(now time.Time, states map[uint64]*pb.BenchState, shown map[uint64]string) string {
	list := make([]*pb.BenchState, 0, len(states))
	for _, s := range states {
		list = append(list, s)
	}
	sort.Slice(list, func(i, j int) bool {
		a, b := list[i].Bench, list[j].Bench
		if a.Row != b.Row {
			return a.Row < b.Row
		}
		return a.Column < b.Column
	})
	var sb strings.Builder
	changed := 0
	for _, s := range list {
		key := fmt.Sprintf("%s|%d|%s", s.VerdictLabel, s.ReadingCount, s.Reason)
		if shown[s.Bench.BenchId] == key {
			continue
		}
		shown[s.Bench.BenchId] = key
		if changed == 0 {
			fmt.Fprintf(&sb, "\n— room at %s —\n", now.Format("15:04:05"))
		}
		changed++
		ago := "—"
		if s.LastReadingAt != nil {
			ago = fmt.Sprintf("%.0f s ago", now.Sub(s.LastReadingAt.AsTime()).Seconds())
		}
		fmt.Fprintf(&sb, "  %-4s %-13s %-10s %2d readings  %-9s %s\n", s.Bench.Label, s.Bench.Experiment, s.VerdictLabel, s.ReadingCount, ago, s.Reason)
	}
	return sb.String()
}
