package main

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"math/rand/v2"
	"net"
	"os"
	"path/filepath"
	"runtime"
	"runtime/pprof"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"time"

	"go.etcd.io/bbolt"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	"example.com/fluxroom/internal/bearer"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

// loadCmd is the scale benchmark behind `make bench`: the real server on
// loopback with a temporary bbolt file, stations on their own connections
// submitting open-loop, watchers on the room streams, and the baselines its
// figures are divided by, measured in the same run.
func (m *Main) loadCmd(ctx context.Context, args []string) error {
	fs := m.newFlags("loadtest")
	stations := fs.String("stations", "30,512", "comma-separated numbers of station connections to sweep")
	watchers := fs.String("watchers", "1,100", "comma-separated numbers of room watchers to sweep")
	rate := fs.Float64("rate", 1000, "open-loop readings per second across all stations")
	dur := fs.Duration("duration", 3*time.Second, "how long each measurement runs")
	callers := fs.Int("callers", 512, "concurrent callers for the closed-loop throughput and its echo baseline")
	profile := fs.String("cpuprofile", "", "write a CPU profile of the run to this file")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *profile != "" {
		f, err := os.Create(*profile)
		if err != nil {
			return err
		}
		pprof.StartCPUProfile(f)
		defer func() { pprof.StopCPUProfile(); f.Close() }()
	}
	w := m.Stdout
	fmt.Fprintf(w, "fluxroom loadtest · %s · %d CPUs · Go %s\n", time.Now().Format("2006-01-02 15:04"), runtime.NumCPU(), runtime.Version())
	echo, err := echoBaseline(*callers, *dur)
	if err != nil {
		return err
	}
	single, group, err := bboltBaselines(*dur)
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "baseline: bare grpc-go unary (health Check via grpc.Server.Serve), %d callers / 32 conns: %.0f calls/s\n", *callers, echo)
	fmt.Fprintf(w, "baseline: raw bbolt appends: one Update each %.0f/s; DB.Batch from 512 goroutines (1 ms delay) %.0f/s\n", single, group)
	for _, ms := range ints(*stations) {
		for _, ws := range ints(*watchers) {
			res, err := runLoad(ms, ws, *rate, *callers, *dur)
			if err != nil {
				return err
			}
			fmt.Fprintf(w, "\nM=%d stations, W=%d watchers\n", ms, ws)
			fmt.Fprintf(w, "  durable ingest, closed loop (%d callers): %.0f readings/s = %.2f × echo, %.2f × bbolt group commit\n",
				*callers, res.closedRate, res.closedRate/echo, res.closedRate/group)
			fmt.Fprintf(w, "  open loop at %.0f/s: stored %.0f/s; submit→ack p50 %s p99 %s p999 %s\n", *rate, res.openRate,
				ms3(res.ack, 0.5), ms3(res.ack, 0.99), ms3(res.ack, 0.999))
			fmt.Fprintf(w, "  submit→watcher p50 %s p99 %s p999 %s over %d events; verdicts missing at watchers %d\n",
				ms3(res.watch, 0.5), ms3(res.watch, 0.99), ms3(res.watch, 0.999), len(res.watch), res.missing)
			fmt.Fprintf(w, "  process CPU per reading %.0f µs (server and load generator together); peak heap %.0f MB; %.0f bytes on disk per reading\n",
				res.cpuPerReading*1e6, res.peakHeapMB, res.bytesPerReading)
			fmt.Fprintf(w, "  start to serving %.1f ms; heap per idle station connection about %.1f KB (half of both ends' growth)\n",
				float64(res.startToServing.Microseconds())/1000, res.bytesPerIdleConn/1024)
		}
	}
	return nil
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

func ms3(d []time.Duration, q float64) string {
	if len(d) == 0 {
		return "—"
	}
	i := min(len(d)-1, int(q*float64(len(d))))
	return fmt.Sprintf("%.1f ms", float64(d[i].Microseconds())/1000)
}

// echoBaseline is the bare grpc-go server: the health service's Check, the
// cheapest unary call there is, from callers over 32 connections.
func echoBaseline(callers int, dur time.Duration) (float64, error) {
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return 0, err
	}
	s := grpc.NewServer()
	healthpb.RegisterHealthServer(s, health.NewServer())
	go s.Serve(l)
	defer s.Stop()
	var conns []*grpc.ClientConn
	for i := 0; i < 32; i++ {
		c, err := grpc.NewClient(l.Addr().String(), grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			return 0, err
		}
		defer c.Close()
		conns = append(conns, c)
	}
	var n atomic.Int64
	ctx, cancel := context.WithTimeout(context.Background(), dur)
	defer cancel()
	var wg sync.WaitGroup
	for i := 0; i < callers; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			h := healthpb.NewHealthClient(conns[i%len(conns)])
			for ctx.Err() == nil {
				if _, err := h.Check(ctx, &healthpb.HealthCheckRequest{}); err == nil {
					n.Add(1)
				}
			}
		}()
	}
	wg.Wait()
	return float64(n.Load()) / dur.Seconds(), nil
}

// bboltBaselines appends 100-byte records: one Update each, then DB.Batch
// from 512 goroutines.
func bboltBaselines(dur time.Duration) (single, group float64, err error) {
	dir, err := os.MkdirTemp("", "fluxroom-bolt-")
	if err != nil {
		return 0, 0, err
	}
	defer os.RemoveAll(dir)
	db, err := bbolt.Open(filepath.Join(dir, "b.db"), 0o600, nil)
	if err != nil {
		return 0, 0, err
	}
	defer db.Close()
	db.MaxBatchDelay = time.Millisecond
	db.Update(func(tx *bbolt.Tx) error { _, err := tx.CreateBucketIfNotExists([]byte("r")); return err })
	val := make([]byte, 100)
	put := func(tx *bbolt.Tx) error {
		b := tx.Bucket([]byte("r"))
		seq, _ := b.NextSequence()
		return b.Put(u64key(seq), val)
	}
	end := time.Now().Add(dur / 2)
	n := 0
	for time.Now().Before(end) {
		db.Update(put)
		n++
	}
	single = float64(n) / (dur / 2).Seconds()
	var m atomic.Int64
	ctx, cancel := context.WithTimeout(context.Background(), dur/2)
	defer cancel()
	var wg sync.WaitGroup
	for i := 0; i < 512; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for ctx.Err() == nil {
				if db.Batch(put) == nil {
					m.Add(1)
				}
			}
		}()
	}
	wg.Wait()
	return single, float64(m.Load()) / (dur / 2).Seconds(), nil
}

func u64key(v uint64) []byte {
	b := make([]byte, 8)
	for i := 7; i >= 0; i-- {
		b[i] = byte(v)
		v >>= 8
	}
	return b
}

type loadResult struct {
	startToServing       time.Duration
	bytesPerIdleConn     float64
	closedRate, openRate float64
	ack, watch           []time.Duration
	missing              int
	cpuPerReading        float64
	peakHeapMB           float64
	bytesPerReading      float64
}

func cpuSeconds() float64 {
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}

// runLoad measures one point of the sweep.
func runLoad(stations, watchers int, rate float64, callers int, dur time.Duration) (loadResult, error) {
	var res loadResult
	dir, err := os.MkdirTemp("", "fluxroom-load-")
	if err != nil {
		return res, err
	}
	defer os.RemoveAll(dir)
	m := NewMain(io.Discard, io.Discard)
	key := "load-test-instructor-key-000"
	t0 := time.Now()
	r, err := m.start(filepath.Join(dir, "load.db"), "127.0.0.1:0", slog.New(slog.NewTextHandler(io.Discard, nil)),
		serverOptions{instructorKey: key, stationRate: 1e6, stationBurst: 1e6})
	if err != nil {
		return res, err
	}
	defer r.stop()
	addr := r.addr.String()
	if c, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials())); err == nil {
		healthpb.NewHealthClient(c).Check(context.Background(), &healthpb.HealthCheckRequest{}, grpc.WaitForReady(true))
		res.startToServing = time.Since(t0)
		c.Close()
	}
	runtime.GC()
	var ms0 runtime.MemStats
	runtime.ReadMemStats(&ms0)
	admin, _ := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(key)))
	defer admin.Close()
	ctx := context.Background()
	in := rpcpb.NewInstructorServiceClient(admin)
	type station struct {
		sid, bid uint64
		st       rpcpb.StationServiceClient
		n        atomic.Int64
	}
	var all []*station
	var sessions []uint64
	for len(all) < stations {
		cs, err := in.CreateSession(ctx, &pb.CreateSessionRequest{Title: fmt.Sprintf("load %d", len(sessions))})
		if err != nil {
			return res, err
		}
		sessions = append(sessions, cs.Session.SessionId)
		var bs []*pb.Bench
		for i := 0; i < 30 && len(all)+len(bs) < stations; i++ {
			bs = append(bs, &pb.Bench{Label: fmt.Sprintf("S%d", i), Row: int32(i / 6), Column: int32(i % 6), Experiment: "coil_force"})
		}
		sb, err := in.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: cs.Session.SessionId, Benches: bs})
		if err != nil {
			return res, err
		}
		for _, b := range sb.Benches {
			j, err := rpcpb.NewStationServiceClient(admin).JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: cs.Session.JoinCode, BenchLabel: b.Label})
			if err != nil {
				return res, err
			}
			c, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(j.StationToken)))
			if err != nil {
				return res, err
			}
			defer c.Close()
			all = append(all, &station{sid: cs.Session.SessionId, bid: b.BenchId, st: rpcpb.NewStationServiceClient(c)})
		}
	}
	runtime.GC()
	var ms1 runtime.MemStats
	runtime.ReadMemStats(&ms1)
	// Both ends of every connection live in this process: half the growth
	// is an estimate of the server's share.
	res.bytesPerIdleConn = float64(int64(ms1.HeapInuse)-int64(ms0.HeapInuse)) / 2 / float64(len(all))
	submit := func(ctx context.Context, s *station) error {
		k := s.n.Add(1)
		I := float64(k%9) * 0.5
		_, err := s.st.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: s.sid, BenchId: s.bid, ReadingId: "l" + strconv.FormatInt(k, 10),
			Values: map[string]*pb.Quantity{"current": {Value: I, Unit: "A"}, "force": {Value: 0.48 * I, Unit: "N"}}})
		return err
	}

	// Closed loop: callers as fast as the server answers, through the
	// stations' connections.
	var closed atomic.Int64
	cctx, cancel := context.WithTimeout(ctx, dur)
	var wg sync.WaitGroup
	for i := 0; i < callers; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			s := all[i%len(all)]
			for cctx.Err() == nil {
				if submit(cctx, s) == nil {
					closed.Add(1)
				}
			}
		}()
	}
	wg.Wait()
	cancel()
	res.closedRate = float64(closed.Load()) / dur.Seconds()
	// Calls the callers gave up on may still commit: let them land before
	// the open loop counts readings.
	time.Sleep(500 * time.Millisecond)

	// Open loop: arrivals at the given rate whatever the answers do, so
	// queueing shows in the latencies; watchers on the rooms.
	type key2 struct {
		bid   uint64
		count int32
	}
	var sentMu sync.Mutex
	sentAt := map[key2]time.Time{}
	var watchMu sync.Mutex
	wctx, wcancel := context.WithCancel(ctx)
	defer wcancel()
	seen := map[key2]bool{}
	for i := 0; i < watchers; i++ {
		sid := sessions[i%len(sessions)]
		stream, err := in.WatchRoom(wctx, &pb.WatchRoomRequest{SessionId: sid})
		if err != nil {
			return res, err
		}
		if _, err := stream.Recv(); err != nil {
			return res, err
		}
		go func() {
			for {
				ev, err := stream.Recv()
				if err != nil {
					return
				}
				b := ev.GetBench()
				if b == nil {
					continue
				}
				k := key2{b.Bench.BenchId, b.ReadingCount}
				now := time.Now()
				sentMu.Lock()
				t0, ok := sentAt[k]
				sentMu.Unlock()
				if ok {
					watchMu.Lock()
					if !seen[k] {
						seen[k] = true
						res.watch = append(res.watch, now.Sub(t0))
					}
					watchMu.Unlock()
				}
			}
		}()
	}
	// Reading counts so far, to know which count each new reading makes.
	counts := map[uint64]int32{}
	for _, s := range all {
		d, err := in.GetBenchDetail(ctx, &pb.GetBenchDetailRequest{SessionId: s.sid, BenchId: s.bid})
		if err != nil {
			return res, err
		}
		counts[s.bid] = int32(len(d.Detail.Readings))
	}
	watched := map[uint64]bool{}
	for i := 0; i < watchers; i++ {
		watched[sessions[i%len(sessions)]] = true
	}
	queues := make([]chan time.Time, len(all))
	var ackMu sync.Mutex
	var stored atomic.Int64
	var expected int
	var swg sync.WaitGroup
	for i, s := range all {
		queues[i] = make(chan time.Time, 4096)
		swg.Add(1)
		go func() {
			defer swg.Done()
			for t0 := range queues[i] {
				if submit(ctx, s) != nil {
					continue
				}
				d := time.Since(t0)
				stored.Add(1)
				ackMu.Lock()
				res.ack = append(res.ack, d)
				ackMu.Unlock()
			}
		}()
	}
	runtime.GC()
	cpu0 := cpuSeconds()
	stop := make(chan struct{})
	peak := make(chan uint64, 1)
	go func() {
		var p uint64
		var st runtime.MemStats
		t := time.NewTicker(20 * time.Millisecond)
		defer t.Stop()
		for {
			runtime.ReadMemStats(&st)
			p = max(p, st.HeapInuse)
			select {
			case <-stop:
				peak <- p
				return
			case <-t.C:
			}
		}
	}()
	rng := rand.New(rand.NewPCG(1, 2))
	start := time.Now()
	next := start
	for time.Since(start) < dur {
		next = next.Add(time.Duration(rng.ExpFloat64() / rate * float64(time.Second)))
		if d := time.Until(next); d > 0 {
			time.Sleep(d)
		}
		i := rng.IntN(len(all))
		s := all[i]
		counts[s.bid]++
		if watched[s.sid] {
			sentMu.Lock()
			sentAt[key2{s.bid, counts[s.bid]}] = next
			sentMu.Unlock()
			expected++
		}
		queues[i] <- next
	}
	for _, q := range queues {
		close(q)
	}
	swg.Wait()
	elapsed := time.Since(start)
	time.Sleep(200 * time.Millisecond)
	close(stop)
	res.peakHeapMB = float64(<-peak) / 1e6
	res.openRate = float64(stored.Load()) / elapsed.Seconds()
	res.cpuPerReading = (cpuSeconds() - cpu0) / float64(max(1, stored.Load()))
	watchMu.Lock()
	res.missing = expected - len(res.watch)
	sort.Slice(res.watch, func(i, j int) bool { return res.watch[i] < res.watch[j] })
	watchMu.Unlock()
	sort.Slice(res.ack, func(i, j int) bool { return res.ack[i] < res.ack[j] })
	if fi, err := os.Stat(filepath.Join(dir, "load.db")); err == nil {
		total := closed.Load() + stored.Load()
		res.bytesPerReading = float64(fi.Size()) / float64(max(1, total))
	}
	return res, nil
}
