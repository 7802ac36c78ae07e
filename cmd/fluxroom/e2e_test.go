package main

import (
	"bytes"
	"compress/gzip"
	"context"
	"fmt"
	"io"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"

	"example.com/fluxroom/internal/bearer"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/wasmclient"
)

var (
	buildOnce sync.Once
	builtDir  string
	buildErr  error
)

// builtDashboard compiles the dashboard to WebAssembly once per test run, the
// way `make wasm` does, so `go test` needs no earlier build step.
func builtDashboard(t testing.TB) string {
	t.Helper()
	buildOnce.Do(func() {
		dir, err := os.MkdirTemp("", "fluxroom-web-")
		if err != nil {
			buildErr = err
			return
		}
		builtDir = dir
		wasm := filepath.Join(dir, wasmclient.BuiltWASM)
		cmd := exec.Command("go", "build", "-trimpath", "-ldflags=-s -w", "-o", wasm, "example.com/fluxroom/wasmclient/app")
		cmd.Env = append(os.Environ(), "GOOS=js", "GOARCH=wasm")
		if out, err := cmd.CombinedOutput(); err != nil {
			buildErr = fmt.Errorf("build app.wasm: %v\n%s", err, out)
			return
		}
		raw, err := os.ReadFile(wasm)
		if err != nil {
			buildErr = err
			return
		}
		var gz bytes.Buffer
		zw, _ := gzip.NewWriterLevel(&gz, gzip.BestCompression)
		zw.Write(raw)
		zw.Close()
		if buildErr = os.WriteFile(filepath.Join(dir, wasmclient.BuiltWASMGzip), gz.Bytes(), 0o644); buildErr != nil {
			return
		}
		goroot, err := exec.Command("go", "env", "GOROOT").Output()
		if err != nil {
			buildErr = err
			return
		}
		execJS, err := os.ReadFile(filepath.Join(strings.TrimSpace(string(goroot)), "lib", "wasm", "wasm_exec.js"))
		if err != nil {
			buildErr = err
			return
		}
		buildErr = os.WriteFile(filepath.Join(dir, wasmclient.BuiltExecJS), execJS, 0o644)
	})
	if buildErr != nil {
		t.Fatal(buildErr)
	}
	return builtDir
}

// program is the real fluxroom serve command running in this process.
type program struct {
	addr   string
	cancel context.CancelFunc
	done   chan error
}

func startProgram(t testing.TB, web, dbPath, addr string, extra ...string) *program {
	t.Helper()
	ready := make(chan net.Addr, 1)
	m := NewMain(io.Discard, io.Discard)
	m.Web = os.DirFS(web)
	m.Ready = ready
	ctx, cancel := context.WithCancel(context.Background())
	p := &program{cancel: cancel, done: make(chan error, 1)}
	go func() {
		p.done <- m.Run(ctx, append([]string{"serve", "--db", dbPath, "--addr", addr, "--log-level", "error", "--admin-key", testKey}, extra...))
	}()
	select {
	case a := <-ready:
		p.addr = a.String()
	case err := <-p.done:
		t.Fatalf("serve exited: %v", err)
	case <-time.After(10 * time.Second):
		t.Fatal("serve did not start in 10 s")
	}
	return p
}

func (p *program) stop(t testing.TB) {
	t.Helper()
	p.cancel()
	if err := <-p.done; err != nil {
		t.Errorf("serve: %v", err)
	}
}

// chromium finds Debian's Chromium. Under CI the browser test must run;
// elsewhere it is skipped with the command that installs it.
func chromium(t testing.TB) string {
	t.Helper()
	for _, name := range []string{os.Getenv("FLUXROOM_CHROMIUM"), "chromium", "chromium-browser"} {
		if name == "" {
			continue
		}
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	const how = "Chromium is needed for the dashboard test: run `sudo apt-get install -y chromium` (or `make test`, which installs it as root on Debian)"
	if os.Getenv("CI") == "true" {
		t.Fatal(how)
	}
	t.Skip(how)
	return ""
}

func browser(t testing.TB, path string) context.Context {
	t.Helper()
	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(path),
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.Flag("disable-quic", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1366, 768),
	)
	actx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	bctx, cancelBrowser := chromedp.NewContext(actx)
	t.Cleanup(func() { cancelBrowser(); cancelAlloc() })
	if err := chromedp.Do(bctx); err != nil { // starts the browser
		t.Fatalf("start chromium: %v", err)
	}
	console := chromedp.Console(bctx)
	go func() {
		for m, err := range console {
			if err != nil {
				return
			}
			if m.Type == chromedp.ConsoleError || m.Type == chromedp.ConsoleException {
				t.Logf("browser console %s: %s", m.Type, m.Text)
			}
		}
	}()
	return bctx
}

// artifactDir is where screenshots are kept for people to look at.
func artifactDir(t testing.TB) string {
	t.Helper()
	dir := os.Getenv("FLUXROOM_ARTIFACTS")
	if dir == "" {
		dir = filepath.Join("..", "..", "test-artifacts")
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	return dir
}

func screenshot(t testing.TB, ctx context.Context, name string) {
	t.Helper()
	png, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Errorf("screenshot %s: %v", name, err)
		return
	}
	if err := os.WriteFile(filepath.Join(artifactDir(t), name), png, 0o644); err != nil {
		t.Error(err)
	}
}

func q(v float64, unit string) *pb.Quantity { return &pb.Quantity{Value: v, Unit: unit} }

// testKey is the administrator's key the tests start the program with.
const testKey = "test-instructor-key-0123456789"

// dialInstructor is a native gRPC client with the administrator's key.
func dialInstructor(t testing.TB, addr string) *grpc.ClientConn {
	t.Helper()
	return dialKey(t, addr, testKey)
}

// dialKey is a native gRPC client sending key with every call.
func dialKey(t testing.TB, addr, key string) *grpc.ClientConn {
	t.Helper()
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(key)))
	if err != nil {
		t.Fatal(err)
	}
	return conn
}

// TestDashboardInBrowser drives headless Chromium against the real program:
// the room loads, a reading submitted over native gRPC changes the right
// tile's state and reason, and the page reconnects by itself after the
// server restarts.
func TestDashboardInBrowser(t *testing.T) {
	if testing.Short() {
		t.Skip("browser test skipped in -short mode")
	}
	chrome := chromium(t)
	web := builtDashboard(t)
	dbPath := filepath.Join(t.TempDir(), "fluxroom.db")
	p := startProgram(t, web, dbPath, "127.0.0.1:0")
	addr := p.addr

	conn := dialInstructor(t, addr)
	defer conn.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	in := rpcpb.NewInstructorServiceClient(conn)
	st := rpcpb.NewStationServiceClient(conn)
	cs, err := in.CreateSession(ctx, &pb.CreateSessionRequest{Title: "Kestrel Vale · PHY 142 · browser test"})
	if err != nil {
		t.Fatal(err)
	}
	sid := cs.Session.SessionId
	var benches []*pb.Bench
	for i, label := range []string{"A1", "A2", "B1"} {
		benches = append(benches, &pb.Bench{Label: label, Row: int32(i / 2), Column: int32(i % 2), Experiment: "coil_force",
			Constants: map[string]*pb.Quantity{"turns": q(100, "1"), "segment_length": q(4, "cm"), "gap_field": q(120, "mT")}})
	}
	sb, err := in.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sid, Benches: benches})
	if err != nil {
		t.Fatal(err)
	}
	ids := map[string]uint64{}
	for _, b := range sb.Benches {
		ids[b.Label] = b.BenchId
	}

	bctx := browser(t, chrome)
	bctx, cancelB := context.WithTimeout(bctx, 90*time.Second)
	defer cancelB()
	url := fmt.Sprintf("http://%s/?session=%d#key=%s", addr, sid, testKey)
	start := time.Now()
	if err := chromedp.Do(bctx,
		chromedp.Navigate(url),
		chromedp.WaitVisible(chromedp.CSS(`section[data-bench="A2"][data-verdict="need-data"]`)),
		chromedp.WaitVisible(chromedp.CSS(`#link[data-link="live"]`)),
	); err != nil {
		t.Fatalf("room did not load: %v", err)
	}
	t.Logf("page load to first live room: %v", time.Since(start))

	// A skipped zero at A2: F = 0.48·I + 0.7 N.
	for i, I := range []float64{0, 1, 2, 3, 4} {
		if _, err := st.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: ids["A2"],
			ReadingId: fmt.Sprintf("a2-%d", i), Values: map[string]*pb.Quantity{
				"current": q(I, "A"), "force": q(0.48*I+0.7+0.001*float64(i%2), "N")}}); err != nil {
			t.Fatal(err)
		}
	}
	if err := chromedp.Do(bctx, chromedp.WaitVisible(chromedp.CSS(`section[data-bench="A2"][data-verdict="check"]`))); err != nil {
		t.Fatalf("tile A2 did not change: %v", err)
	}
	// The tile says the cause in a few words; the whole reason is its title.
	reason, err := chromedp.Run(bctx, chromedp.AttributeValue(chromedp.CSS(`section[data-bench="A2"] .reason`), "title"))
	headline, _ := chromedp.Run(bctx, chromedp.Text(chromedp.CSS(`section[data-bench="A2"] .reason`)))
	if headline != "sensor not zeroed" {
		t.Errorf("A2 tile says %q, want sensor not zeroed", headline)
	}
	if err != nil {
		t.Fatal(err)
	}
	a1, err := chromedp.Run(bctx, chromedp.AttributeValue(chromedp.CSS(`section[data-bench="A1"]`), "data-verdict"))
	if err != nil {
		t.Fatal(err)
	}
	other := a1.Value
	if !strings.Contains(reason.Value, "intercept") || !strings.Contains(reason.Value, "not zeroed") {
		t.Errorf("A2 reason = %q, want the not-zeroed intercept", reason.Value)
	}
	if other != "need-data" {
		t.Errorf("A1 verdict = %q, want need-data (only A2 changed)", other)
	}
	screenshot(t, bctx, "room-after-reading.png")

	// Restart the server on the same address; the page must reconnect by
	// itself and show a change made after the restart.
	p.stop(t)
	if err := chromedp.Do(bctx, chromedp.WaitNotPresent(chromedp.CSS(`#link[data-link="live"]`))); err != nil {
		t.Fatalf("page did not notice the server stopping: %v", err)
	}
	p = startProgram(t, web, dbPath, addr)
	defer p.stop(t)
	conn2 := dialInstructor(t, addr)
	defer conn2.Close()
	st2 := rpcpb.NewStationServiceClient(conn2)
	if err := chromedp.Do(bctx, chromedp.WaitVisible(chromedp.CSS(`#link[data-link="live"]`))); err != nil {
		t.Fatalf("page did not reconnect: %v", err)
	}
	for i, I := range []float64{0, 2, 4} {
		if _, err := st2.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: ids["B1"],
			ReadingId: fmt.Sprintf("b1-%d", i), Values: map[string]*pb.Quantity{
				"current": q(I, "A"), "force": q(0.48*I+0.001*float64(i%2), "N")}}); err != nil {
			t.Fatal(err)
		}
	}
	if err := chromedp.Do(bctx, chromedp.WaitVisible(chromedp.CSS(`section[data-bench="B1"][data-verdict="consistent"]`))); err != nil {
		t.Fatalf("tile B1 did not update after the restart: %v", err)
	}
	screenshot(t, bctx, "room-after-restart.png")
}
