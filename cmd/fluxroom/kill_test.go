package main

import (
	"context"
	"fmt"
	"math/rand/v2"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"

	"example.com/fluxroom/internal/bearer"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

// builds holds the real program built once per test run for each set of
// build tags: the release build, and the failpoints build with the test
// switches.
var builds sync.Map // tags → func() (string, error)

// fluxroomBinary builds the real program once per test run, as released.
func fluxroomBinary(t *testing.T) string { return buildFluxroom(t, "") }

// buildFluxroom builds the real program once per test run with the given
// build tags ("failpoints" for the test switches).
func buildFluxroom(t *testing.T, tags string) string {
	t.Helper()
	build, _ := builds.LoadOrStore(tags, sync.OnceValues(func() (string, error) {
		dir, err := os.MkdirTemp("", "fluxroom-bin-")
		if err != nil {
			return "", err
		}
		bin := filepath.Join(dir, "fluxroom")
		if out, err := exec.Command("go", "build", "-tags", tags, "-o", bin, ".").CombinedOutput(); err != nil {
			return "", fmt.Errorf("go build -tags %q: %v\n%s", tags, err, out)
		}
		return bin, nil
	}))
	bin, err := build.(func() (string, error))()
	if err != nil {
		t.Fatal(err)
	}
	return bin
}

func freePort(t *testing.T) string {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().String()
}

// killRun is one durability experiment: cycles of load, SIGKILL and
// recovery against the real binary.
type killResult struct {
	cycles, acked, found, lost, duplicates int
}

func killCycles(t *testing.T, bin string, cycles int, extra ...string) killResult {
	dir := t.TempDir()
	dbPath := filepath.Join(dir, "fluxroom.db")
	addr := freePort(t)
	start := func() *exec.Cmd {
		cmd := exec.Command(bin, append([]string{"serve", "--db", dbPath, "--addr", addr, "--log-level", "error", "--admin-key", testKey,
			"--station-rate", "10000", "--station-burst", "10000"}, extra...)...)
		cmd.Stderr = os.Stderr
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		for i := 0; i < 200; i++ {
			if c, err := net.Dial("tcp", addr); err == nil {
				c.Close()
				return cmd
			}
			time.Sleep(10 * time.Millisecond)
		}
		t.Fatal("the server did not start")
		return nil
	}
	// Set up a room of 8 benches once.
	cmd := start()
	conn := dialInstructor(t, addr)
	ctx := context.Background()
	in := rpcpb.NewInstructorServiceClient(conn)
	cs, err := in.CreateSession(ctx, &pb.CreateSessionRequest{Title: "durability"})
	if err != nil {
		t.Fatal(err)
	}
	var benches []*pb.Bench
	for i := 0; i < 8; i++ {
		benches = append(benches, &pb.Bench{Label: fmt.Sprintf("K%d", i), Column: int32(i), Experiment: "coil_force"})
	}
	sb, err := in.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: cs.Session.SessionId, Benches: benches})
	if err != nil {
		t.Fatal(err)
	}
	tokens := map[uint64]string{}
	for _, b := range sb.Benches {
		j, err := rpcpb.NewStationServiceClient(conn).JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: cs.Session.JoinCode, BenchLabel: b.Label})
		if err != nil {
			t.Fatal(err)
		}
		tokens[b.BenchId] = j.StationToken
	}
	conn.Close()

	var res killResult
	acked := map[string]uint64{} // reading id → bench
	sent := map[string]uint64{}
	rng := rand.New(rand.NewPCG(7, 7))
	n := 0
	for c := 0; c < cycles; c++ {
		if c > 0 {
			cmd = start()
		}
		var mu sync.Mutex
		var wg sync.WaitGroup
		lctx, stop := context.WithCancel(ctx)
		for bid, tok := range tokens {
			sconn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(tok)))
			if err != nil {
				t.Fatal(err)
			}
			defer sconn.Close()
			st := rpcpb.NewStationServiceClient(sconn)
			wg.Add(1)
			go func() {
				defer wg.Done()
				for lctx.Err() == nil {
					mu.Lock()
					n++
					id := fmt.Sprintf("k%d", n)
					sent[id] = bid
					mu.Unlock()
					_, err := st.SubmitReading(lctx, &pb.SubmitReadingRequest{SessionId: cs.Session.SessionId, BenchId: bid, ReadingId: id,
						Values: map[string]*pb.Quantity{"current": q(1, "A"), "force": q(0.48, "N")}})
					if err == nil {
						mu.Lock()
						acked[id] = bid
						mu.Unlock()
					} else {
						time.Sleep(5 * time.Millisecond)
					}
				}
			}()
		}
		time.Sleep(time.Duration(80+rng.IntN(220)) * time.Millisecond)
		cmd.Process.Signal(syscall.SIGKILL)
		cmd.Wait()
		stop()
		wg.Wait()

		// The server is dead: open its file and look.
		db, err := store.Open(dbPath, store.Options{})
		if err != nil {
			t.Fatalf("cycle %d: the file does not open after SIGKILL: %v", c, err)
		}
		if err := db.Check(); err != nil {
			t.Errorf("cycle %d: %v", c, err)
		}
		ids := map[string]int{}
		for bid := range tokens {
			_, rs, err := db.BenchReadings(cs.Session.SessionId, bid)
			if err != nil {
				t.Fatal(err)
			}
			for _, r := range rs {
				ids[r.ID]++
			}
		}
		db.Close()
		res.lost = 0
		for id := range acked {
			if ids[id] == 0 {
				res.lost++
			}
		}
		res.duplicates = 0
		for _, k := range ids {
			if k > 1 {
				res.duplicates++
			}
		}
		res.cycles = c + 1
	}
	// Stations retry what was never acknowledged: the ids make it a no-op
	// for what was stored after all.
	cmd = start()
	for id, bid := range sent {
		if _, ok := acked[id]; ok {
			continue
		}
		sconn, _ := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(tokens[bid])))
		for try := 0; ; try++ {
			_, err := rpcpb.NewStationServiceClient(sconn).SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: cs.Session.SessionId, BenchId: bid,
				ReadingId: id, Values: map[string]*pb.Quantity{"current": q(1, "A"), "force": q(0.48, "N")}})
			if err == nil {
				break
			}
			if try == 50 {
				t.Fatalf("retry of %s: %v", id, err)
			}
			time.Sleep(20 * time.Millisecond)
		}
		sconn.Close()
	}
	cmd.Process.Signal(syscall.SIGTERM)
	stopped := make(chan struct{})
	go func() { cmd.Wait(); close(stopped) }()
	select {
	case <-stopped:
	case <-time.After(30 * time.Second):
		// A server that does not stop: its goroutines' stacks (SIGQUIT)
		// say where it waits.
		cmd.Process.Signal(syscall.SIGQUIT)
		<-stopped
		t.Fatal("the server did not stop within 30 s of SIGTERM; its goroutines are above")
	}
	db, err := store.Open(dbPath, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	ids := map[string]int{}
	for bid := range tokens {
		_, rs, _ := db.BenchReadings(cs.Session.SessionId, bid)
		for _, r := range rs {
			ids[r.ID]++
		}
	}
	res.acked = len(acked)
	for id := range acked {
		if ids[id] > 0 {
			res.found++
		}
	}
	for _, k := range ids {
		if k > 1 {
			res.duplicates++
		}
	}
	return res
}

// TestSurvivesSIGKILL kills the real server with SIGKILL under load, 20
// times, and checks after each kill that every acknowledged reading is in
// the file and the file passes bbolt's check; then the stations' retries of
// unacknowledged readings store nothing twice. SIGKILL leaves the page
// cache intact, so this shows the order "commit, then reply"; that the
// commit reaches the disk is bbolt's fsync, which fluxroom never turns off.
func TestSurvivesSIGKILL(t *testing.T) {
	if testing.Short() {
		t.Skip("kill cycles skipped in -short mode")
	}
	res := killCycles(t, fluxroomBinary(t), 20)
	t.Logf("SIGKILL cycles %d: readings acknowledged %d, found %d, lost %d, stored twice %d", res.cycles, res.acked, res.found, res.acked-res.found, res.duplicates)
	if res.found != res.acked || res.duplicates != 0 || res.acked == 0 {
		t.Errorf("acknowledged %d, found %d, duplicates %d", res.acked, res.found, res.duplicates)
	}
}

// TestSIGKILLNegativeControl gives the kill test teeth: the same load with
// a server that acknowledges before it writes must lose readings. That
// server is the failpoints build; the release build has no such switch
// (TestReleaseBuildHasNoTestSwitches).
func TestSIGKILLNegativeControl(t *testing.T) {
	if testing.Short() {
		t.Skip("kill cycles skipped in -short mode")
	}
	res := killCycles(t, buildFluxroom(t, "failpoints"), 5, "--test-ack-before-commit")
	t.Logf("negative control, %d cycles: acknowledged %d, found %d, lost %d", res.cycles, res.acked, res.found, res.acked-res.found)
	if res.found == res.acked {
		t.Errorf("acknowledging before the commit lost nothing (%d acknowledged): the kill test cannot tell", res.acked)
	}
}

// TestReleaseBuildHasNoTestSwitches: the program as released knows no test
// switch, and its server package compiles none in.
func TestReleaseBuildHasNoTestSwitches(t *testing.T) {
	out, _ := exec.Command(fluxroomBinary(t), "serve", "--test-ack-before-commit").CombinedOutput()
	if !strings.Contains(string(out), "flag provided but not defined: -test-ack-before-commit") {
		t.Errorf("release serve --test-ack-before-commit said %q; want the flag unknown", out)
	}
	help, _ := exec.Command(fluxroomBinary(t), "serve", "--help").CombinedOutput()
	if strings.Contains(string(help), "test-ack") {
		t.Errorf("release serve --help lists a test switch:\n%s", help)
	}
	for _, tc := range []struct {
		tags, want, not string
	}{{"", "hooks_off.go", "hooks.go"}, {"failpoints", "hooks.go", "hooks_off.go"}} {
		files, err := exec.Command("go", "list", "-tags", tc.tags, "-f", "{{join .GoFiles \" \"}}", "example.com/fluxroom/server").Output()
		if err != nil {
			t.Fatal(err)
		}
		got := " " + strings.TrimSpace(string(files)) + " "
		if !strings.Contains(got, " "+tc.want+" ") || strings.Contains(got, " "+tc.not+" ") {
			t.Errorf("server with tags %q compiles %s; want %s and not %s", tc.tags, got, tc.want, tc.not)
		}
	}
}
