package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"math/rand/v2"
	"net/http"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"go.etcd.io/bbolt"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/internal/bearer"
	"example.com/fluxroom/internal/grpcweb"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

// loadConfig is one run of the scale benchmark.
type loadConfig struct {
	stations, watchers []int
	light, heavy       float64
	// perStation caps each station's pace: a data logger's, far above a
	// group typing by hand, so few stations cannot carry a room's rate.
	perStation float64
	dur        time.Duration
	callers    int
	flooders   int
	profile    string
}

// The sweep's servers run with the station rate limit a department would
// set for benches with data loggers; the closed loop lifts it to measure
// the ceiling.
const (
	loadStationRate  = "20"
	loadStationBurst = "40"
	loadKey          = "load-test-instructor-key-000"
)

// loadCmd is the scale benchmark behind `make bench`: real servers as child
// processes on loopback with temporary bbolt files, stations on their own
// connections submitting open loop, watchers on the room streams, and the
// baselines its figures are divided by, measured in the same run.
func (m *Main) loadCmd(ctx context.Context, args []string) error {
	fs := m.newFlags("loadtest")
	full := fs.Bool("full", false, "the full sweep: M = 30, 512, 5000 stations, W = 1, 100 watchers, 5 s phases")
	stations := fs.String("stations", "", "comma-separated station counts to sweep (default 100,512; 30,512,5000 with --full)")
	watchers := fs.String("watchers", "1,100", "comma-separated watcher counts to sweep")
	light := fs.Float64("light", 1000, "light open-loop load, readings per second")
	heavy := fs.Float64("heavy", 5000, "heavy open-loop load, readings per second")
	perStation := fs.Float64("per-station", 10, "most readings per second one station sends in the open loop")
	dur := fs.Duration("duration", 0, "length of each phase (default 1.5 s; 5 s with --full)")
	callers := fs.Int("callers", 512, "concurrent callers of the closed loop and its echo baseline")
	flooders := fs.Int("flooders", 4, "concurrent callers of the one flooding station in the fairness phase")
	profile := fs.String("server-cpuprofile", "", "write each measured server's CPU profile to PREFIX-closed.prof and PREFIX-M-W.prof")
	if err := parse(fs, args); err != nil {
		return err
	}
	cfg := loadConfig{watchers: ints(*watchers), light: *light, heavy: *heavy, perStation: *perStation,
		dur: *dur, callers: *callers, flooders: *flooders, profile: *profile}
	switch {
	case *stations != "":
		cfg.stations = ints(*stations)
	case *full:
		cfg.stations = []int{30, 512, 5000}
	default:
		cfg.stations = []int{100, 512}
	}
	if cfg.dur == 0 {
		cfg.dur = 1500 * time.Millisecond
		if *full {
			cfg.dur = 5 * time.Second
		}
	}
	if len(cfg.stations) == 0 || len(cfg.watchers) == 0 || cfg.light <= 0 || cfg.heavy <= 0 || cfg.callers <= 0 {
		return usageError{"loadtest: --stations, --watchers, --light, --heavy and --callers must be positive"}
	}
	return runLoadtest(m.Stdout, cfg)
}

func ints(s string) []int {
	var out []int
	for _, f := range strings.Split(s, ",") {
		if n, err := strconv.Atoi(strings.TrimSpace(f)); err == nil && n > 0 {
			out = append(out, n)
		}
	}
	return out
}

// quantile of sorted durations, in milliseconds.
func quantile(d []time.Duration, q float64) float64 {
	if len(d) == 0 {
		return 0
	}
	i := min(len(d)-1, int(q*float64(len(d))))
	return float64(d[i].Microseconds()) / 1000
}

func ms3(d []time.Duration) string {
	if len(d) == 0 {
		return "p50 — p99 — p999 —"
	}
	return fmt.Sprintf("p50 %.1f p99 %.1f p999 %.1f ms", quantile(d, 0.5), quantile(d, 0.99), quantile(d, 0.999))
}

func mark(ok bool) string {
	if ok {
		return "met"
	}
	return "MISSED"
}

func runLoadtest(w io.Writer, cfg loadConfig) error {
	fmt.Fprintf(w, "fluxroom loadtest · %s · %s · %d CPUs · %s · servers are child processes on loopback\n",
		time.Now().Format("2006-01-02 15:04"), cpuModel(), runtime.NumCPU(), runtime.Version())
	dir, err := os.MkdirTemp("", "fluxroom-load-")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)

	echo, echoCPU, err := echoBaseline(cfg.callers, 32, cfg.dur)
	if err != nil {
		return fmt.Errorf("echo baseline: %w", err)
	}
	echoOwn, echoOwnCPU, err := echoBaseline(cfg.callers, cfg.callers, cfg.dur)
	if err != nil {
		return fmt.Errorf("echo baseline: %w", err)
	}
	fmt.Fprintf(w, "baseline echo: bare grpc-go health Check via grpc.Server.Serve, %d callers: over 32 connections %.0f calls/s, server CPU %.0f µs/call; one connection each %.0f calls/s, %.0f µs/call\n",
		cfg.callers, echo, echoCPU*1e6, echoOwn, echoOwnCPU*1e6)
	single, group, commits, err := bboltBaselines(dir, cfg.dur)
	if err != nil {
		return fmt.Errorf("bbolt baseline: %w", err)
	}
	fmt.Fprintf(w, "baseline bbolt: 100-byte appends, one Update each %.0f/s (commit with its fsyncs %s); one writer committing what 512 goroutines queued %.0f/s\n",
		single, ms3(commits), group)

	cl, err := closedLoops(dir, cfg)
	if err != nil {
		return fmt.Errorf("closed loop: %w", err)
	}
	fmt.Fprintf(w, "\nclosed loop, %d callers, each reading durable and judged before its answer:\n", cfg.callers)
	fmt.Fprintf(w, "  over 32 shared connections:   %6.0f readings/s = %.2f × echo, %.2f × bbolt group commit; server CPU %.0f µs/reading = %.1f × echo's per call\n",
		cl.sharedRate, cl.sharedRate/echo, cl.sharedRate/group, cl.sharedCPU*1e6, cl.sharedCPU/echoCPU)
	fmt.Fprintf(w, "  one connection per station:   %6.0f readings/s = %.2f × echo on one connection each; server CPU %.0f µs/reading = %.1f × echo's per call\n",
		cl.ownRate, cl.ownRate/echoOwn, cl.ownCPU*1e6, cl.ownCPU/echoOwnCPU)

	var points []sweepPoint
	for _, ms := range cfg.stations {
		for _, ws := range cfg.watchers {
			p, err := sweep(dir, cfg, ms, ws)
			if err != nil {
				return fmt.Errorf("M=%d W=%d: %w", ms, ws, err)
			}
			p.print(w)
			points = append(points, p)
		}
	}
	summarize(w, cfg, echo, echoOwn, cl, points)
	return nil
}

// echoBaseline measures the bare grpc-go server in its own process, with
// callers spread over conns connections.
func echoBaseline(callers, conns int, dur time.Duration) (rate, cpuPerCall float64, err error) {
	c, _, err := startChild("loadtest-echo")
	if err != nil {
		return 0, 0, err
	}
	defer c.stop()
	var ccs []*grpc.ClientConn
	for i := 0; i < conns; i++ {
		cc, err := grpc.NewClient(c.addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			return 0, 0, err
		}
		defer cc.Close()
		ccs = append(ccs, cc)
	}
	n, cpu := closedRun(callers, dur, c, func(ctx context.Context, i int) error {
		_, err := healthpb.NewHealthClient(ccs[i%len(ccs)]).Check(ctx, &healthpb.HealthCheckRequest{})
		return err
	})
	return n / dur.Seconds(), cpu, nil
}

// closedRun runs callers that each call as fast as answers come for dur and
// returns how many calls succeeded, and the server's CPU per call.
func closedRun(callers int, dur time.Duration, c *child, call func(ctx context.Context, caller int) error) (float64, float64) {
	var n atomic.Int64
	ctx, cancel := context.WithTimeout(context.Background(), dur)
	defer cancel()
	cpu0 := c.cpu()
	var wg sync.WaitGroup
	for i := 0; i < callers; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for ctx.Err() == nil {
				if call(ctx, i) == nil {
					n.Add(1)
				}
			}
		}()
	}
	wg.Wait()
	cpu := c.cpu() - cpu0
	return float64(n.Load()), cpu / float64(max(1, n.Load()))
}

// bboltBaselines appends 100-byte records to a bare bbolt file: one Update
// each, then one writer that commits everything 512 goroutines queued while
// the previous commit ran (the store's scheme, without the store).
func bboltBaselines(dir string, dur time.Duration) (single, group float64, commits []time.Duration, err error) {
	db, err := bbolt.Open(filepath.Join(dir, "baseline.db"), 0o600, nil)
	if err != nil {
		return 0, 0, nil, err
	}
	defer db.Close()
	if err := db.Update(func(tx *bbolt.Tx) error { _, err := tx.CreateBucketIfNotExists([]byte("r")); return err }); err != nil {
		return 0, 0, nil, err
	}
	val := make([]byte, 100)
	put := func(tx *bbolt.Tx) error {
		b := tx.Bucket([]byte("r"))
		seq, _ := b.NextSequence()
		return b.Put(u64key(seq), val)
	}
	end := time.Now().Add(dur / 2)
	n := 0
	for time.Now().Before(end) {
		t0 := time.Now()
		if err := db.Update(put); err != nil {
			return 0, 0, nil, err
		}
		commits = append(commits, time.Since(t0))
		n++
	}
	single = float64(n) / (dur / 2).Seconds()
	slices.Sort(commits)

	queue := make(chan chan error, 512)
	go func() {
		for first := range queue {
			batch := []chan error{first}
		drain:
			for len(batch) < 512 {
				select {
				case d := <-queue:
					batch = append(batch, d)
				default:
					break drain
				}
			}
			err := db.Update(func(tx *bbolt.Tx) error {
				for range batch {
					if err := put(tx); err != nil {
						return err
					}
				}
				return nil
			})
			for _, d := range batch {
				d <- err
			}
		}
	}()
	defer close(queue)
	var m atomic.Int64
	ctx, cancel := context.WithTimeout(context.Background(), dur/2)
	defer cancel()
	var wg sync.WaitGroup
	for i := 0; i < 512; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			done := make(chan error, 1)
			for ctx.Err() == nil {
				queue <- done
				if <-done == nil {
					m.Add(1)
				}
			}
		}()
	}
	wg.Wait()
	return single, float64(m.Load()) / (dur / 2).Seconds(), commits, nil
}

func u64key(v uint64) []byte {
	b := make([]byte, 8)
	for i := 7; i >= 0; i-- {
		b[i] = byte(v)
		v >>= 8
	}
	return b
}

// loadStation is one simulated bench laptop. Between phases a new lab
// section takes the same laptops: the station joins a fresh bench and keeps
// its connection, so every phase judges runs of a realistic length.
type loadStation struct {
	sid, bid uint64
	token    string
	// st is the station's client on its own connection; calls carry the
	// token of the bench it is joined to now.
	st rpcpb.StationServiceClient
	// sent numbers the readings it made, for their ids and values.
	sent atomic.Int64
	// stored counts its readings the server took on this bench: in the open
	// loop a station sends one at a time, so the count is the bench's
	// reading count that the room stream shows once the reading is judged.
	stored atomic.Int32
}

func (s *loadStation) creds() grpc.CallOption { return grpc.PerRPCCredentials(bearer.Token(s.token)) }

// reading is the station's next reading: a coil-force run stepping the
// current, force following F = N·B·L·I for the demo coil with 1 % noise.
func (s *loadStation) reading() *pb.SubmitReadingRequest {
	k := s.sent.Add(1)
	I := 0.5 + float64(k%8)*0.5
	F := 0.048 * I * (1 + 0.01*float64(k%5-2))
	return &pb.SubmitReadingRequest{SessionId: s.sid, BenchId: s.bid, ReadingId: "l" + strconv.FormatInt(k, 10),
		Values: map[string]*pb.Quantity{"current": {Value: I, Unit: "A"}, "force": {Value: F, Unit: "N"}}}
}

// loadRoom is a server with its sessions and joined stations.
type loadRoom struct {
	c        *child
	db       string
	admin    *grpc.ClientConn
	in       rpcpb.InstructorServiceClient
	sessions []uint64 // the current section's
	stations []*loadStation
	conns    []*grpc.ClientConn
	sections int
}

func (r *loadRoom) close() {
	for _, c := range r.conns {
		c.Close()
	}
	if r.admin != nil {
		r.admin.Close()
	}
}

// newLoadRoom starts a server on a fresh file and joins n stations to a
// first section. With own, every station dials its own connection and
// makes one call on it.
func newLoadRoom(dir string, n int, own bool, serveArgs ...string) (*loadRoom, time.Duration, error) {
	db := filepath.Join(dir, fmt.Sprintf("load-%d.db", time.Now().UnixNano()))
	c, startup, err := startChild(append([]string{"serve", "--db", db, "--log-level", "error", "--instructor-key", loadKey}, serveArgs...)...)
	if err != nil {
		return nil, 0, err
	}
	r := &loadRoom{c: c, db: db}
	if r.admin, err = grpc.NewClient(c.addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(loadKey))); err != nil {
		c.kill()
		return nil, 0, err
	}
	r.in = rpcpb.NewInstructorServiceClient(r.admin)
	for range n {
		r.stations = append(r.stations, &loadStation{})
	}
	if err := r.newSection(); err != nil {
		c.kill()
		return nil, 0, err
	}
	if own {
		if err := r.connectAll(); err != nil {
			c.kill()
			return nil, 0, err
		}
	}
	return r, startup, nil
}

// newSection starts a new lab section: sessions of 30 benches for all the
// stations, each station joined to one bench.
func (r *loadRoom) newSection() error {
	ctx := context.Background()
	r.sections++
	r.sessions = r.sessions[:0]
	for first := 0; first < len(r.stations); first += 30 {
		cs, err := r.in.CreateSession(ctx, &pb.CreateSessionRequest{Title: fmt.Sprintf("Harrowgate load, section %d room %d", r.sections, len(r.sessions)+1)})
		if err != nil {
			return err
		}
		r.sessions = append(r.sessions, cs.Session.SessionId)
		group := r.stations[first:min(first+30, len(r.stations))]
		var bs []*pb.Bench
		for i := range group {
			bs = append(bs, &pb.Bench{Label: fmt.Sprintf("B%02d", i+1), Row: int32(i / 6), Column: int32(i % 6), Experiment: "coil_force"})
		}
		sb, err := r.in.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: cs.Session.SessionId, Benches: bs})
		if err != nil {
			return err
		}
		for i, b := range sb.Benches {
			j, err := rpcpb.NewStationServiceClient(r.admin).JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: cs.Session.JoinCode, BenchLabel: b.Label})
			if err != nil {
				return err
			}
			s := group[i]
			s.sid, s.bid, s.token = cs.Session.SessionId, b.BenchId, j.StationToken
			s.stored.Store(0)
		}
	}
	return nil
}

// connectAll gives every station its own connection, opened by one call.
func (r *loadRoom) connectAll() error {
	var mu sync.Mutex
	var firstErr error
	sem := make(chan struct{}, 64)
	var wg sync.WaitGroup
	for _, s := range r.stations {
		c, err := grpc.NewClient(r.c.addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			return err
		}
		r.conns = append(r.conns, c)
		s.st = rpcpb.NewStationServiceClient(c)
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer wg.Done()
			defer func() { <-sem }()
			if _, err := s.st.GetBenchState(context.Background(), &pb.GetBenchStateRequest{SessionId: s.sid, BenchId: s.bid}, s.creds()); err != nil {
				mu.Lock()
				firstErr = err
				mu.Unlock()
			}
		}()
	}
	wg.Wait()
	return firstErr
}

type closedResult struct {
	sharedRate, sharedCPU float64
	ownRate, ownCPU       float64
}

// closedLoops measures the durable ingest ceiling: callers submitting as
// fast as answers come, first over 32 shared connections (each call with
// its own station's token, as the echo baseline), then each station on its
// own connection. The rate limit is lifted for it.
func closedLoops(dir string, cfg loadConfig) (closedResult, error) {
	var res closedResult
	args := []string{"--station-rate", "1e9", "--station-burst", "1000000000"}
	if cfg.profile != "" {
		args = append(args, "--cpuprofile", cfg.profile+"-closed.prof")
	}
	r, _, err := newLoadRoom(dir, cfg.callers, false, args...)
	if err != nil {
		return res, err
	}
	defer r.c.stop()
	defer r.close()
	var shared []rpcpb.StationServiceClient
	for i := 0; i < 32; i++ {
		c, err := grpc.NewClient(r.c.addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			return res, err
		}
		r.conns = append(r.conns, c)
		shared = append(shared, rpcpb.NewStationServiceClient(c))
	}
	n, cpu := closedRun(cfg.callers, cfg.dur, r.c, func(ctx context.Context, i int) error {
		s := r.stations[i%len(r.stations)]
		_, err := shared[i%len(shared)].SubmitReading(ctx, s.reading(), s.creds())
		return err
	})
	res.sharedRate, res.sharedCPU = n/cfg.dur.Seconds(), cpu
	if err := r.newSection(); err != nil {
		return res, err
	}
	if err := r.connectAll(); err != nil {
		return res, err
	}
	n, cpu = closedRun(cfg.callers, cfg.dur, r.c, func(ctx context.Context, i int) error {
		s := r.stations[i%len(r.stations)]
		_, err := s.st.SubmitReading(ctx, s.reading(), s.creds())
		return err
	})
	res.ownRate, res.ownCPU = n/cfg.dur.Seconds(), cpu
	return res, nil
}

// phase is one open-loop measurement.
type phase struct {
	offered       float64
	stored        int
	elapsed       time.Duration
	ack, watch    []time.Duration
	missing, late int
	failed        int
	serverCPU     float64 // seconds, over the phase
	genCPU        float64
	peakRSS       float64
	floodTried    int
	floodStored   int
	floodRefused  int
	flooders      int
	// ackFlood are the acknowledgements of readings due while the flooding
	// station was on; ack then holds those due while it was quiet.
	ackFlood []time.Duration
}

// floodWindow is how long the flooding station is on, then off, in turn:
// quiet and flooded readings share the machine's noise, where two phases
// one after the other would not.
const floodWindow = 250 * time.Millisecond

func flooding(start, t time.Time) bool { return (t.Sub(start)/floodWindow)%2 == 1 }

// webWatch follows a room as the dashboard does: WatchRoom over gRPC-Web
// on its own HTTP/1.1 connection, through the server's HTTP side. It
// returns when the stream or ctx ends.
func webWatch(ctx context.Context, addr string, sessionID uint64, onEvent func(*pb.WatchRoomResponse)) error {
	body, err := proto.Marshal(&pb.WatchRoomRequest{SessionId: sessionID})
	if err != nil {
		return err
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, "http://"+addr+"/"+rpcpb.InstructorService_ServiceDesc.ServiceName+"/WatchRoom",
		bytes.NewReader(grpcweb.Frame(body)))
	if err != nil {
		return err
	}
	req.Header.Set("Content-Type", grpcweb.ContentType)
	req.Header.Set("Accept", grpcweb.ContentType)
	req.Header.Set("X-Grpc-Web", "1")
	req.Header.Set("Authorization", "Bearer "+loadKey)
	tr := &http.Transport{}
	defer tr.CloseIdleConnections()
	resp, err := (&http.Client{Transport: tr}).Do(req)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK || resp.Header.Get("Grpc-Status") != "" && resp.Header.Get("Grpc-Status") != "0" {
		return fmt.Errorf("WatchRoom: HTTP %d, grpc-status %q %q", resp.StatusCode, resp.Header.Get("Grpc-Status"), resp.Header.Get("Grpc-Message"))
	}
	var d grpcweb.Deframer
	buf := make([]byte, 32<<10)
	for {
		n, err := resp.Body.Read(buf)
		msgs, trailer, done := d.Push(buf[:n])
		for _, m := range msgs {
			var ev pb.WatchRoomResponse
			if err := proto.Unmarshal(m, &ev); err != nil {
				return err
			}
			onEvent(&ev)
		}
		if done {
			return fmt.Errorf("WatchRoom ended: %s", grpcweb.TrailerLines(trailer)("grpc-message"))
		}
		if err != nil {
			return err
		}
	}
}

// lateAfter is when a verdict counts as late at the dashboard: well past
// any target, long before a group would leave the bench.
const lateAfter = 100 * time.Millisecond

// arrival is when a watcher first saw a bench at a reading count.
type arrival struct {
	count int32
	at    time.Time
}

// openLoop sends readings at rate (exponential inter-arrival times, so
// bursts happen as they do) for dur, whatever the answers do, so queueing
// shows in the latencies. Watchers follow the rooms; with flood, one
// station also sends as fast as it can from several callers.
func openLoop(r *loadRoom, rate float64, dur time.Duration, watchers, flooders int) (phase, error) {
	ph := phase{offered: rate, flooders: flooders}
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	// Watchers record when each bench's reading count first reached each
	// value; latencies are joined with the acknowledgements afterwards.
	type watcherLog struct {
		sid    uint64
		mu     sync.Mutex
		events map[uint64][]arrival
	}
	logs := make([]*watcherLog, watchers)
	var wwg sync.WaitGroup
	for i := range logs {
		wl := &watcherLog{sid: r.sessions[i%len(r.sessions)], events: map[uint64][]arrival{}}
		logs[i] = wl
		first := make(chan error, 1)
		wwg.Add(1)
		go func() {
			defer wwg.Done()
			snapshot := true
			err := webWatch(ctx, r.c.addr, wl.sid, func(ev *pb.WatchRoomResponse) {
				if snapshot {
					snapshot = false
					first <- nil
					return
				}
				if b := ev.GetBench(); b != nil {
					now := time.Now()
					wl.mu.Lock()
					wl.events[b.Bench.BenchId] = append(wl.events[b.Bench.BenchId], arrival{b.ReadingCount, now})
					wl.mu.Unlock()
				}
			})
			if snapshot {
				first <- fmt.Errorf("watcher: %w", err)
			}
		}()
		select {
		case err := <-first:
			if err != nil {
				return ph, err
			}
		case <-time.After(30 * time.Second):
			return ph, fmt.Errorf("watcher of session %d: no snapshot within 30 s", wl.sid)
		}
	}

	type acked struct {
		s     *loadStation
		count int32
		sent  time.Time
	}
	var mu sync.Mutex
	var acks []acked
	var failed atomic.Int64
	stations := r.stations
	var flood *loadStation
	if flooders > 0 {
		flood, stations = stations[0], stations[1:]
	}
	start := time.Now().Add(50 * time.Millisecond)
	queues := make([]chan time.Time, len(stations))
	var swg sync.WaitGroup
	for i, s := range stations {
		queues[i] = make(chan time.Time, 1024)
		swg.Add(1)
		go func() {
			defer swg.Done()
			for t0 := range queues[i] {
				// A reading that takes this long counts as failed, not as a
				// hung benchmark.
				cctx, cancel := context.WithTimeout(ctx, 30*time.Second)
				_, err := s.st.SubmitReading(cctx, s.reading(), s.creds())
				cancel()
				if err != nil {
					failed.Add(1)
					continue
				}
				d := time.Since(t0)
				count := s.stored.Add(1)
				mu.Lock()
				acks = append(acks, acked{s, count, t0})
				if flooders > 0 && flooding(start, t0) {
					ph.ackFlood = append(ph.ackFlood, d)
				} else {
					ph.ack = append(ph.ack, d)
				}
				mu.Unlock()
			}
		}()
	}
	var floodTried, floodStored, floodRefused atomic.Int64
	fctx, fcancel := context.WithCancel(ctx)
	var fwg sync.WaitGroup
	for i := 0; i < flooders; i++ {
		fwg.Add(1)
		go func() {
			defer fwg.Done()
			for fctx.Err() == nil {
				if !flooding(start, time.Now()) {
					time.Sleep(5 * time.Millisecond)
					continue
				}
				_, err := flood.st.SubmitReading(fctx, flood.reading(), flood.creds())
				floodTried.Add(1)
				switch status.Code(err) {
				case codes.OK:
					floodStored.Add(1)
				case codes.ResourceExhausted:
					floodRefused.Add(1)
				}
			}
		}()
	}

	r.c.resetPeak()
	cpu0, gen0 := r.c.cpu(), selfCPU()
	rng := rand.New(rand.NewPCG(uint64(len(stations)), uint64(rate)))
	time.Sleep(time.Until(start))
	next := start
	for time.Since(start) < dur {
		next = next.Add(time.Duration(rng.ExpFloat64() / rate * float64(time.Second)))
		// Wake at most once a millisecond and send what is due: a timer
		// per arrival would cost the generator more than the server a
		// reading. A reading sent late is measured from its due time.
		if d := time.Until(next); d > 0 {
			time.Sleep(max(d, time.Millisecond))
		}
		queues[rng.IntN(len(stations))] <- next
	}
	for _, q := range queues {
		close(q)
	}
	swg.Wait()
	fcancel()
	fwg.Wait()
	ph.elapsed = time.Since(start)
	ph.serverCPU, ph.genCPU = r.c.cpu()-cpu0, selfCPU()-gen0
	_, ph.peakRSS = r.c.mem()
	// Let the last events reach the watchers, then stop them.
	time.Sleep(300 * time.Millisecond)
	cancel()
	wwg.Wait()

	ph.stored, ph.failed = len(acks), int(failed.Load())
	ph.floodTried, ph.floodStored, ph.floodRefused = int(floodTried.Load()), int(floodStored.Load()), int(floodRefused.Load())
	for _, wl := range logs {
		for _, a := range acks {
			if a.s.sid != wl.sid {
				continue
			}
			ev := wl.events[a.s.bid]
			i, _ := slices.BinarySearchFunc(ev, a.count, func(e arrival, c int32) int { return int(e.count - c) })
			if i == len(ev) {
				ph.missing++
				continue
			}
			d := ev[i].at.Sub(a.sent)
			ph.watch = append(ph.watch, d)
			if d > lateAfter {
				ph.late++
			}
		}
	}
	slices.Sort(ph.ack)
	slices.Sort(ph.ackFlood)
	slices.Sort(ph.watch)
	return ph, nil
}

// sweepPoint is one M × W point of the sweep.
type sweepPoint struct {
	stations, watchers int
	startup, restart   time.Duration
	idleConnBytes      float64
	light, heavy       phase
	fair               phase
	diskPerReading     float64 // the file at the end, over every reading
	usedPerReading     float64 // its pages in use, likewise
	// growthPerReading is how much the pages in use grew over the heavy
	// phase, per reading stored in it: the cost of a reading alone, the
	// sections' sessions and benches being written before.
	growthPerReading float64
}

func sweep(dir string, cfg loadConfig, stations, watchers int) (sweepPoint, error) {
	p := sweepPoint{stations: stations, watchers: watchers}
	// The sections follow one another within seconds here, where a real
	// room is hours apart: a quiet room leaves memory after a second.
	args := []string{"--station-rate", loadStationRate, "--station-burst", loadStationBurst, "--room-idle", "1s"}
	if cfg.profile != "" {
		args = append(args, "--cpuprofile", fmt.Sprintf("%s-%d-%d.prof", cfg.profile, stations, watchers))
	}
	r, startup, err := newLoadRoom(dir, stations, false, args...)
	if err != nil {
		return p, err
	}
	defer r.close()
	p.startup = startup
	time.Sleep(200 * time.Millisecond)
	rss0, _ := r.c.mem()
	if err := r.connectAll(); err != nil {
		r.c.kill()
		return p, err
	}
	time.Sleep(200 * time.Millisecond)
	rss1, _ := r.c.mem()
	p.idleConnBytes = (rss1 - rss0) / float64(stations)

	capRate := func(rate float64) float64 { return min(rate, cfg.perStation*float64(stations)) }
	phases := []struct {
		out            *phase
		rate           float64
		watch, flooder int
	}{
		{&p.light, capRate(cfg.light), watchers, 0},
		{&p.heavy, capRate(cfg.heavy), watchers, 0},
		// Fairness: the same light load with one station flooding in every
		// other quarter second; the room's other stations should not notice.
		{&p.fair, capRate(cfg.light), 0, cfg.flooders},
	}
	total := 0
	for i, ph := range phases {
		if i > 0 {
			if err := r.newSection(); err != nil {
				r.c.kill()
				return p, err
			}
		}
		used0 := r.c.metric("fluxroom_db_used_bytes")
		if *ph.out, err = openLoop(r, ph.rate, cfg.dur, ph.watch, ph.flooder); err != nil {
			r.c.kill()
			return p, err
		}
		if ph.out == &p.heavy {
			p.growthPerReading = (r.c.metric("fluxroom_db_used_bytes") - used0) / float64(max(1, p.heavy.stored))
		}
		total += ph.out.stored + ph.out.floodStored
	}
	r.close()
	if err := r.c.stop(); err != nil {
		return p, fmt.Errorf("stop: %w", err)
	}
	if fi, err := os.Stat(r.db); err == nil {
		p.diskPerReading = float64(fi.Size()) / float64(max(1, total))
	}
	if db, err := store.Open(r.db, store.Options{ReadOnly: true}); err == nil {
		if used, err := db.UsedBytes(); err == nil {
			p.usedPerReading = float64(used) / float64(max(1, total))
		}
		db.Close()
	}
	// Restart on the filled file: how long a crashed or upgraded server
	// keeps the room waiting.
	c, restart, err := startChild("serve", "--db", r.db, "--log-level", "error", "--instructor-key", loadKey)
	if err != nil {
		return p, fmt.Errorf("restart: %w", err)
	}
	p.restart = restart
	return p, c.stop()
}

func (p sweepPoint) print(w io.Writer) {
	fmt.Fprintf(w, "\nM=%d stations on their own connections, W=%d watchers\n", p.stations, p.watchers)
	for _, x := range []struct {
		name string
		ph   phase
	}{{"light", p.light}, {"heavy", p.heavy}} {
		ph := x.ph
		rate := float64(ph.stored) / ph.elapsed.Seconds()
		fmt.Fprintf(w, "  %-5s %5.0f/s offered, %5.0f/s durable; submit→ack %s; submit→watcher %s over %d deliveries\n",
			x.name, ph.offered, rate, ms3(ph.ack), ms3(ph.watch), len(ph.watch))
		fmt.Fprintf(w, "        verdicts missing at watchers %d, late (> %s) %d, failed submits %d; server CPU %.0f µs/reading (load generator %.0f); server peak RSS %.0f MB\n",
			ph.missing, lateAfter, ph.late, ph.failed, ph.serverCPU/float64(max(1, ph.stored))*1e6, ph.genCPU/float64(max(1, ph.stored))*1e6, ph.peakRSS/1e6)
	}
	f := p.fair
	on := f.elapsed.Seconds() / 2
	fmt.Fprintf(w, "  fairness at %.0f/s, one station flooding from %d callers in every other %s: others' p99 quiet %.1f ms, flooded %.1f ms (%.2f × quiet); the flood tried %.0f/s, stored %.0f/s, refused %.0f/s while on\n",
		f.offered, f.flooders, floodWindow, quantile(f.ack, 0.99), quantile(f.ackFlood, 0.99), quantile(f.ackFlood, 0.99)/quantile(f.ack, 0.99),
		float64(f.floodTried)/on, float64(f.floodStored)/on, float64(f.floodRefused)/on)
	fmt.Fprintf(w, "  idle connection %.1f KB of server RSS; start to serving %.0f ms, restart on the filled file %.0f ms\n",
		p.idleConnBytes/1024, ms(p.startup), ms(p.restart))
	fmt.Fprintf(w, "  disk: in-use pages grew %.0f bytes per reading over the heavy phase (runs of %.0f readings per bench); over the whole point %.0f bytes in use, %.0f of file per reading, sessions and benches included (bbolt grows the file ahead in 16 MiB steps)\n",
		p.growthPerReading, float64(p.heavy.stored)/float64(p.stations), p.usedPerReading, p.diskPerReading)
}

func ms(d time.Duration) float64 { return float64(d.Microseconds()) / 1000 }

// summarize checks the figures against the targets of the README's
// performance section.
func summarize(w io.Writer, cfg loadConfig, echo, echoOwn float64, cl closedResult, points []sweepPoint) {
	fmt.Fprintf(w, "\ntargets\n")
	fmt.Fprintf(w, "  durable ingest ≥ 0.6 × echo at %d callers: %.2f over 32 connections (%s), %.2f with one connection per station (%s)\n",
		cfg.callers, cl.sharedRate/echo, mark(cl.sharedRate/echo >= 0.6), cl.ownRate/echoOwn, mark(cl.ownRate/echoOwn >= 0.6))
	for _, p := range points {
		h := p.heavy
		if p.stations >= 512 && h.offered >= 5000 {
			ok := quantile(h.watch, 0.99) <= 30 && quantile(h.watch, 0.999) <= 50 && h.missing == 0
			fmt.Fprintf(w, "  %.0f/s from %d connections, W=%d: p99 submit→watcher %.1f ms ≤ 30, p999 %.1f ms ≤ 50, missing %d = 0: %s\n",
				h.offered, p.stations, p.watchers, quantile(h.watch, 0.99), quantile(h.watch, 0.999), h.missing, mark(ok))
		}
		l := p.light
		if l.offered >= 1000 {
			ok := quantile(l.ack, 0.5) <= 2 && quantile(l.ack, 0.99) <= 12
			fmt.Fprintf(w, "  light %.0f/s, M=%d W=%d: submit→ack p50 %.1f ms ≤ 2, p99 %.1f ms ≤ 12: %s\n",
				l.offered, p.stations, p.watchers, quantile(l.ack, 0.5), quantile(l.ack, 0.99), mark(ok))
		}
		ratio := quantile(p.fair.ackFlood, 0.99) / quantile(p.fair.ack, 0.99)
		fmt.Fprintf(w, "  fairness M=%d W=%d: others' p99 with a flooding station %.2f × quiet ≤ 2: %s\n", p.stations, p.watchers, ratio, mark(ratio <= 2))
	}
	last := points[len(points)-1]
	fmt.Fprintf(w, "  idle connection ≤ 30 KB: %.1f KB at M=%d (%s)\n", last.idleConnBytes/1024, last.stations, mark(last.idleConnBytes <= 30*1024))
	for _, p := range points {
		if p.stations >= 5000 {
			peak := max(p.light.peakRSS, p.heavy.peakRSS)
			fmt.Fprintf(w, "  ≤ 300 MB at %d stations: server peak RSS %.0f MB (%s)\n", p.stations, peak/1e6, mark(peak <= 300e6))
		}
	}
	worstRestart, worstDisk := time.Duration(0), 0.0
	for _, p := range points {
		worstRestart, worstDisk = max(worstRestart, p.restart), max(worstDisk, p.growthPerReading)
	}
	fmt.Fprintf(w, "  restart to serving < 100 ms: worst %.0f ms (%s)\n", ms(worstRestart), mark(worstRestart < 100*time.Millisecond))
	fmt.Fprintf(w, "  ≤ 250 MB per million readings on disk: the file's pages in use grew by at most %.0f bytes per reading (%s)\n", worstDisk, mark(worstDisk <= 250))
	// Cost per reading across M, compared where the load is the same: the
	// same offered rate and the same number of watchers (a fixed cost per
	// second spreads over fewer readings at a lower rate, and each watcher
	// is a stream to write).
	type key struct {
		rate     float64
		watchers int
	}
	groups := map[key][]string{}
	spread := map[key][2]float64{}
	seen := map[key]map[int]bool{}
	var order []key
	for _, p := range points {
		for _, ph := range []phase{p.heavy, p.light} {
			k := key{ph.offered, p.watchers}
			if seen[k][p.stations] {
				continue // both phases of a small room run at the same capped rate
			}
			c := ph.serverCPU / float64(max(1, ph.stored)) * 1e6
			if seen[k] == nil {
				seen[k] = map[int]bool{}
				order = append(order, k)
				spread[k] = [2]float64{c, c}
			}
			seen[k][p.stations] = true
			groups[k] = append(groups[k], fmt.Sprintf("M=%d %.0f µs", p.stations, c))
			spread[k] = [2]float64{min(spread[k][0], c), max(spread[k][1], c)}
		}
	}
	for _, k := range order {
		if len(groups[k]) < 2 {
			continue
		}
		sp := spread[k]
		fmt.Fprintf(w, "  server CPU per reading flat across M at %.0f/s, W=%d: %s; highest / lowest %.2f (%s at ≤ 1.25)\n",
			k.rate, k.watchers, strings.Join(groups[k], ", "), sp[1]/sp[0], mark(sp[1]/sp[0] <= 1.25))
	}
}
