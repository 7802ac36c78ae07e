package main

import (
	"context"
	"path/filepath"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"go.etcd.io/bbolt"
	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	"example.com/fluxroom/proto/rpcpb"
)

// The baselines the load program divides its figures by, and its closed loop.

// echoBaseline measures the bare grpc-go server in its own process, with
// callers spread over conns connections.
func echoBaseline(callers, conns int, dur time.Duration) (rate float64, cpu closedCPU, err error) {
	c, _, err := startChild("loadtest-echo")
	if err != nil {
		return 0, cpu, err
	}
	defer c.stop()
	var ccs []*grpc.ClientConn
	for i := 0; i < conns; i++ {
		cc, err := grpc.NewClient(c.addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			return 0, cpu, err
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

// closedCPU is the CPU time per call of a closed loop's server and of the
// load generator, which share the machine's cores.
type closedCPU struct{ server, gen float64 }

// closedRun runs callers that each call as fast as answers come for dur and
// returns how many calls succeeded, and the CPU per call.
func closedRun(callers int, dur time.Duration, c *child, call func(ctx context.Context, caller int) error) (float64, closedCPU) {
	var n atomic.Int64
	ctx, cancel := context.WithTimeout(context.Background(), dur)
	defer cancel()
	cpu0, gen0 := c.cpu(), selfCPU()
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
	calls := float64(max(1, n.Load()))
	return float64(n.Load()), closedCPU{server: (c.cpu() - cpu0) / calls, gen: (selfCPU() - gen0) / calls}
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

type closedResult struct {
	sharedRate, ownRate float64
	sharedCPU, ownCPU   closedCPU
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
		c, err := grpc.NewClient(r.c.addr, stationDialOptions()...)
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
