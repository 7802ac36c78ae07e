package main

import (
	"bufio"
	"context"
	"fmt"
	"math"
	"net"
	"net/http"
	"os"
	"os/exec"
	"runtime/debug"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// The load program runs every server it measures as a child process, so
// the server's CPU and memory are read from the kernel apart from the load
// generator's, on the same cores.

// echoExecutable is the program the echo baseline's server runs: this one,
// except in tests, where the running program is the test.
var echoExecutable = os.Executable

// startEcho starts the echo baseline's server (echoServe) as a child.
func startEcho() (*child, time.Duration, error) {
	exe, err := echoExecutable()
	if err != nil {
		return nil, 0, err
	}
	return startChild(exe, echoChild)
}

// child is a server process started by the load program.
type child struct {
	cmd  *exec.Cmd
	addr string
}

// startChild runs exe with args plus --addr on a free loopback port, and
// returns once the gRPC health service answers SERVING, with the time that
// took from the exec.
func startChild(exe string, args ...string) (*child, time.Duration, error) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return nil, 0, err
	}
	addr := l.Addr().String()
	l.Close()
	cmd := exec.Command(exe, append(args, "--addr", addr)...)
	cmd.Stderr = os.Stderr
	t0 := time.Now()
	if err := cmd.Start(); err != nil {
		return nil, 0, err
	}
	c := &child{cmd: cmd, addr: addr}
	// Poll the port first: a gRPC client that finds it closed backs off
	// for a second, which would be measured as start-up time.
	for {
		if time.Since(t0) > 10*time.Second {
			c.kill()
			return nil, 0, fmt.Errorf("loadtest: the server %v did not listen within 10 s", args)
		}
		if nc, err := net.Dial("tcp", addr); err == nil {
			nc.Close()
			break
		}
		time.Sleep(500 * time.Microsecond)
	}
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		c.kill()
		return nil, 0, err
	}
	defer conn.Close()
	h := healthpb.NewHealthClient(conn)
	for time.Since(t0) < 10*time.Second {
		ctx, cancel := context.WithTimeout(context.Background(), time.Second)
		r, err := h.Check(ctx, &healthpb.HealthCheckRequest{}, grpc.WaitForReady(true))
		cancel()
		if err == nil && r.GetStatus() == healthpb.HealthCheckResponse_SERVING {
			return c, time.Since(t0), nil
		}
		time.Sleep(time.Millisecond)
	}
	c.kill()
	return nil, 0, fmt.Errorf("loadtest: the server %v did not start serving within 10 s", args)
}

// stop asks the server to shut down (SIGTERM) and waits for it.
func (c *child) stop() error {
	c.cmd.Process.Signal(syscall.SIGTERM)
	done := make(chan error, 1)
	go func() { done <- c.cmd.Wait() }()
	select {
	case err := <-done:
		return err
	case <-time.After(10 * time.Second):
		c.cmd.Process.Kill()
		return fmt.Errorf("loadtest: the server did not stop within 10 s")
	}
}

func (c *child) kill() { c.cmd.Process.Kill(); c.cmd.Wait() }

// cpu is the child's user + system CPU time so far.
func (c *child) cpu() float64 { return procCPU(c.cmd.Process.Pid) }

// mem is the child's resident set now and its peak since the last reset,
// in bytes.
func (c *child) mem() (rss, peak float64) { return procMem(c.cmd.Process.Pid) }

// resetPeak starts a new peak-memory window (Linux clear_refs 5); where the
// kernel refuses, the peak stays the process's lifetime peak.
func (c *child) resetPeak() {
	os.WriteFile(fmt.Sprintf("/proc/%d/clear_refs", c.cmd.Process.Pid), []byte("5"), 0)
}

// clockTick is USER_HZ, the unit of /proc/PID/stat's CPU times: 100 on
// every Linux architecture Go supports // common practice.
const clockTick = 100

func procCPU(pid int) float64 {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if err != nil {
		return 0
	}
	// The command name may hold spaces: fields count from after its ')'.
	s := string(b)
	f := strings.Fields(s[strings.LastIndexByte(s, ')')+1:])
	if len(f) < 13 {
		return 0
	}
	ut, _ := strconv.ParseFloat(f[11], 64)
	st, _ := strconv.ParseFloat(f[12], 64)
	return (ut + st) / clockTick
}

func procMem(pid int) (rss, peak float64) {
	f, err := os.Open(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		return 0, 0
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		k, v, ok := strings.Cut(sc.Text(), ":")
		if !ok {
			continue
		}
		kb, _ := strconv.ParseFloat(strings.TrimSuffix(strings.TrimSpace(v), " kB"), 64)
		switch k {
		case "VmRSS":
			rss = kb * 1024
		case "VmHWM":
			peak = kb * 1024
		}
	}
	return rss, peak
}

// metricsPage is one reading of a child's /metrics, a line each: a phase
// reads it once at each end and takes every figure from the same moment.
type metricsPage []string

// scrape reads the child's /metrics; an empty page when it does not answer.
func (c *child) scrape() metricsPage {
	resp, err := http.Get("http://" + c.addr + "/metrics")
	if err != nil {
		return nil
	}
	defer resp.Body.Close()
	var out []string
	sc := bufio.NewScanner(resp.Body)
	for sc.Scan() {
		out = append(out, sc.Text())
	}
	return out
}

// value is one unlabelled value on the page; NaN when absent.
func (p metricsPage) value(name string) float64 {
	for _, line := range p {
		if v, ok := strings.CutPrefix(line, name+" "); ok {
			if f, err := strconv.ParseFloat(strings.TrimSpace(v), 64); err == nil {
				return f
			}
		}
	}
	return math.NaN()
}

// histogram is the cumulative bucket counts of a histogram on the page,
// name with its labels but le ("method=\"…\","): upper bound in seconds →
// count.
func (p metricsPage) histogram(name, labels string) map[float64]float64 {
	out := map[float64]float64{}
	prefix := name + "_bucket{" + labels + "le=\""
	for _, line := range p {
		rest, ok := strings.CutPrefix(line, prefix)
		if !ok {
			continue
		}
		le, count, ok := strings.Cut(rest, "\"} ")
		if !ok {
			continue
		}
		bound := math.Inf(1)
		if le != "+Inf" {
			bound, _ = strconv.ParseFloat(le, 64)
		}
		n, _ := strconv.ParseFloat(count, 64)
		out[bound] = n
	}
	return out
}

// bucketQuantile is the upper bound of the first bucket holding quantile q
// of the calls between two readings of a histogram, in milliseconds.
func bucketQuantile(before, after map[float64]float64, q float64) float64 {
	var bounds []float64
	for b := range after {
		bounds = append(bounds, b)
	}
	slices.Sort(bounds)
	total := after[math.Inf(1)] - before[math.Inf(1)]
	for _, b := range bounds {
		if total > 0 && after[b]-before[b] >= q*total {
			return b * 1000
		}
	}
	return math.Inf(1)
}

// selfCPU is the load generator's own CPU time.
func selfCPU() float64 {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}

// cpuModel names the processor, for the header of the results.
func cpuModel() string {
	b, err := os.ReadFile("/proc/cpuinfo")
	if err != nil {
		return "unknown CPU"
	}
	for _, line := range strings.Split(string(b), "\n") {
		if k, v, ok := strings.Cut(line, ":"); ok && strings.TrimSpace(k) == "model name" {
			return strings.TrimSpace(v)
		}
	}
	return "unknown CPU"
}

// serveGCPercent is fluxroom serve's default --gc-percent, Go's own
// (cmd/fluxroom/run.go), which the echo's server runs with too.
const serveGCPercent = 100

// echoMethod is the baseline's echo: it returns the reading it is sent,
// decoded and encoded again, so the baseline moves the same bytes through
// the same protobuf map code as a SubmitReading, and nothing else.
const echoMethod = "/fluxroom.loadtest.Echo/Echo"

var echoService = grpc.ServiceDesc{
	ServiceName: "fluxroom.loadtest.Echo",
	HandlerType: (*any)(nil),
	Methods: []grpc.MethodDesc{{MethodName: "Echo",
		Handler: func(_ any, _ context.Context, dec func(any) error, _ grpc.UnaryServerInterceptor) (any, error) {
			req := new(pb.SubmitReadingRequest)
			if err := dec(req); err != nil {
				return nil, err
			}
			return req, nil
		}}},
}

// echoServe is the baseline server: bare grpc-go, grpc.Server.Serve with
// default options, the echo and the health service (an empty call), and
// the collector set as fluxroom serve sets it by default. This program
// runs it when started as `fluxroom-load echo-child`.
func echoServe(ctx context.Context, args []string) error {
	fs := newFlags(echoChild, os.Stderr)
	addr := fs.String("addr", "127.0.0.1:0", "host:port to listen on")
	if err := parse(fs, args); err != nil {
		return err
	}
	if _, fromEnv := os.LookupEnv("GOGC"); !fromEnv {
		debug.SetGCPercent(serveGCPercent)
	}
	l, err := net.Listen("tcp", *addr)
	if err != nil {
		return err
	}
	s := grpc.NewServer()
	healthpb.RegisterHealthServer(s, health.NewServer())
	s.RegisterService(&echoService, struct{}{})
	go func() { <-ctx.Done(); s.Stop() }()
	return s.Serve(l)
}
