package main

import (
	"context"
	"fmt"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"google.golang.org/grpc"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

// The baselines the load program divides its figures by, and its closed loop.

// echoRates are the bare grpc-go server's rates and CPU per call over one
// topology: the echo of a reading, and the empty health Check.
type echoRates struct {
	echo, empty       float64
	echoCPU, emptyCPU closedCPU
}

// echoBaseline measures the bare grpc-go server in its own process, with
// callers spread over conns connections dialled as stations dial: first
// echoing readings like those the closed loop submits, then the empty call.
func echoBaseline(callers, conns int, dur time.Duration) (echoRates, error) {
	var res echoRates
	c, _, err := startEcho()
	if err != nil {
		return res, err
	}
	defer c.stop()
	var ccs []*grpc.ClientConn
	for i := 0; i < conns; i++ {
		cc, err := grpc.NewClient(c.addr, stationDialOptions()...)
		if err != nil {
			return res, err
		}
		defer cc.Close()
		ccs = append(ccs, cc)
	}
	stations := make([]*loadStation, callers)
	for i := range stations {
		stations[i] = &loadStation{sid: 1, bid: uint64(i + 1)}
	}
	n, cpu := closedRun(callers, dur, c, func(ctx context.Context, i int) error {
		return ccs[i%len(ccs)].Invoke(ctx, echoMethod, stations[i].reading(), new(pb.SubmitReadingRequest))
	})
	res.echo, res.echoCPU = n/dur.Seconds(), cpu
	n, cpu = closedRun(callers, dur, c, func(ctx context.Context, i int) error {
		_, err := healthpb.NewHealthClient(ccs[i%len(ccs)]).Check(ctx, &healthpb.HealthCheckRequest{})
		return err
	})
	res.empty, res.emptyCPU = n/dur.Seconds(), cpu
	return res, nil
}

// openEcho is the echo baseline of an open-loop phase: the bare grpc-go
// server answering readings arriving at the phase's rate over as many
// connections as the phase has stations. The machine's own latency at that
// load, transport and load generator included, is what the server's
// latencies are divided by.
type openEcho struct {
	rate      float64
	latencies []time.Duration // sorted, from each reading's due time
	serverCPU float64         // seconds per call
}

// echoOpenLoop measures the echo server in its own process under each of
// the rates in turn, each for dur, over conns connections dialled and used
// once before the clock starts.
func echoOpenLoop(conns int, rates []float64, dur time.Duration) ([]openEcho, error) {
	c, _, err := startEcho()
	if err != nil {
		return nil, err
	}
	defer c.stop()
	ccs := make([]*grpc.ClientConn, conns)
	for i := range ccs {
		if ccs[i], err = grpc.NewClient(c.addr, stationDialOptions()...); err != nil {
			return nil, err
		}
		defer ccs[i].Close()
	}
	readings := make([]*pb.SubmitReadingRequest, conns)
	for i := range readings {
		readings[i] = (&loadStation{sid: 1, bid: uint64(i + 1)}).reading()
	}
	echo := func(ctx context.Context, i int) error {
		return ccs[i].Invoke(ctx, echoMethod, readings[i], new(pb.SubmitReadingRequest))
	}
	if err := openEach(conns, func(i int) error { return echo(context.Background(), i) }); err != nil {
		return nil, fmt.Errorf("connecting %d stations to the echo server: %w", conns, err)
	}
	var wg sync.WaitGroup
	var failed atomic.Int64
	var out []openEcho
	for _, rate := range rates {
		res := openEcho{rate: rate}
		var mu sync.Mutex
		queues := make([]chan time.Time, conns)
		for i := range queues {
			queues[i] = make(chan time.Time, 1024)
			wg.Add(1)
			go func() {
				defer wg.Done()
				for t0 := range queues[i] {
					ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
					err := echo(ctx, i)
					cancel()
					if err != nil {
						failed.Add(1)
						continue
					}
					d := time.Since(t0)
					mu.Lock()
					res.latencies = append(res.latencies, d)
					mu.Unlock()
				}
			}()
		}
		cpu0 := c.cpu()
		schedule(queues, rate, dur, time.Now().Add(50*time.Millisecond))
		wg.Wait()
		if n := failed.Load(); n > 0 {
			return nil, fmt.Errorf("%d echo calls failed at %.0f/s", n, rate)
		}
		res.serverCPU = (c.cpu() - cpu0) / float64(max(1, len(res.latencies)))
		slices.Sort(res.latencies)
		out = append(out, res)
	}
	return out, nil
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

// closedResult is the closed loop over each topology, each set against
// the echo's rounds between its own.
type closedResult struct {
	shared, own closedTopology
	// longestRun bounds the readings one bench got in either loop.
	longestRun int
}

// closedRounds is how many rounds of fluxroom's closed loop each topology
// runs, each between two rounds of the echo over the same topology: this
// machine's speed drifts by 2× within the hour, so a round is divided by
// the echo either side of it, and the median round's ratios are the
// figures. Two runs of the program a minute apart differed by more than
// the changes they were to measure when the echo ran once, at the start.
const closedRounds = 3

// closedTopology is fluxroom's closed loop over one topology and the echo's
// rounds beside it.
type closedTopology struct {
	rate     float64   // fluxroom's readings/s over all its rounds
	cpu      closedCPU // per reading, over all its rounds
	echoRate float64   // the echo's calls/s over all its rounds
	echoCPU  closedCPU // per call, over all its rounds
	// Each fluxroom round over the mean of the echo rounds either side:
	// ingest, and server and load-generator CPU per call.
	rateRatios, cpuRatios, genRatios []float64
	// passes and judgings are the room judges' passes and the benches they
	// judged, per reading stored, over all rounds.
	passes, judgings float64
}

// judgeWork fills passes and judgings from the server's metrics before
// and after the rounds.
func (t *closedTopology) judgeWork(before, after metricsPage) {
	diff := func(name string) float64 { return after.value(name) - before.value(name) }
	stored := max(1, diff("fluxroom_readings_stored_total"))
	t.passes, t.judgings = diff("fluxroom_judge_lag_seconds_count")/stored, diff("fluxroom_bench_judgings_total")/stored
}

// rateRatio, cpuRatio and genRatio are the median round's.
func (t closedTopology) rateRatio() float64 { return median(t.rateRatios) }
func (t closedTopology) cpuRatio() float64  { return median(t.cpuRatios) }
func (t closedTopology) genRatio() float64  { return median(t.genRatios) }

func median(xs []float64) float64 {
	if len(xs) == 0 {
		return 0
	}
	s := slices.Clone(xs)
	slices.Sort(s)
	if n := len(s); n%2 == 0 {
		return (s[n/2-1] + s[n/2]) / 2
	}
	return s[len(s)/2]
}

// alternate runs the echo and fluxroom by turns, echo first and last, each
// round for dur, and sets each fluxroom round against the echo's either
// side of it.
func alternate(rounds int, dur time.Duration, echo, flux func(time.Duration) (float64, closedCPU)) closedTopology {
	var t closedTopology
	var fluxN, echoN float64
	var fluxCPU, echoCPU closedCPU
	en, ec := echo(dur)
	echoN, echoCPU = en, ec.times(en)
	for range rounds {
		n, c := flux(dur)
		fluxN, fluxCPU = fluxN+n, fluxCPU.plus(c.times(n))
		en2, ec2 := echo(dur)
		echoN, echoCPU = echoN+en2, echoCPU.plus(ec2.times(en2))
		// Rates over equal rounds: calls over the mean of the echo's calls.
		t.rateRatios = append(t.rateRatios, ratio(n, (en+en2)/2))
		t.cpuRatios = append(t.cpuRatios, ratio(c.server, (ec.server+ec2.server)/2))
		t.genRatios = append(t.genRatios, ratio(c.gen, (ec.gen+ec2.gen)/2))
		en, ec = en2, ec2
	}
	t.rate, t.cpu = fluxN/(float64(rounds)*dur.Seconds()), fluxCPU.times(1/max(1, fluxN))
	t.echoRate, t.echoCPU = echoN/(float64(rounds+1)*dur.Seconds()), echoCPU.times(1/max(1, echoN))
	return t
}

func (c closedCPU) times(k float64) closedCPU  { return closedCPU{c.server * k, c.gen * k} }
func (c closedCPU) plus(d closedCPU) closedCPU { return closedCPU{c.server + d.server, c.gen + d.gen} }

// closedRunLength and closedSections keep the closed loop's benches at a
// lab's run length: a caller submits closedRunLength readings to a bench,
// then takes the next bench not used yet, from closedSections lab sections
// joined beforehand. The judging it pays for is then that of runs a group
// takes, not of runs hundreds of readings long, which no lab makes and
// whose judging grows with their length.
const (
	closedRunLength = 30
	closedSections  = 10
)

// seat is a bench a station joined: its session, its id and its token.
type seat struct {
	sid, bid uint64
	token    string
}

// takeSeats joins every station to a bench in each of n new sections and
// returns all the seats.
func (r *loadRoom) takeSeats(n int) ([]seat, error) {
	var seats []seat
	for range n {
		if err := r.newSection(); err != nil {
			return nil, err
		}
		for _, s := range r.stations {
			seats = append(seats, seat{s.sid, s.bid, s.token})
		}
	}
	return seats, nil
}

// closedLoops measures the durable ingest ceiling: callers submitting as
// fast as answers come, first over 32 shared connections (each call with
// its own station's token, as the echo baseline), then each caller on its
// own station's connection, each by turns with the bare echo over the same
// connections (alternate). The rate limit is lifted for it.
func closedLoops(dir string, cfg loadConfig) (closedResult, error) {
	var res closedResult
	args := append([]string{"--station-rate", "1e9", "--station-burst", "1000000000"}, cfg.collectorArgs()...)
	if cfg.profile != "" {
		args = append(args, "--cpuprofile", cfg.profile+"-closed.prof")
	}
	r, _, err := newLoadRoom(cfg.fluxroom, dir, cfg.callers, false, args...)
	if err != nil {
		return res, err
	}
	defer r.c.stop()
	defer r.close()
	e, _, err := startEcho()
	if err != nil {
		return res, err
	}
	defer e.stop()
	dial := func(addr string, n int) ([]*grpc.ClientConn, error) {
		var ccs []*grpc.ClientConn
		for range n {
			c, err := grpc.NewClient(addr, stationDialOptions()...)
			if err != nil {
				return nil, err
			}
			r.conns = append(r.conns, c) // closed with the room
			ccs = append(ccs, c)
		}
		return ccs, nil
	}
	readings := make([]*pb.SubmitReadingRequest, cfg.callers)
	for i := range readings {
		readings[i] = (&loadStation{sid: 1, bid: uint64(i + 1)}).reading()
	}
	// echoOver dials n connections to the echo and uses each once, so its
	// rounds do not pay for connecting, as the stations' did not.
	echoOver := func(n int) (func(time.Duration) (float64, closedCPU), error) {
		ccs, err := dial(e.addr, n)
		if err != nil {
			return nil, err
		}
		err = openEach(n, func(i int) error {
			return ccs[i].Invoke(context.Background(), echoMethod, readings[i%len(readings)], new(pb.SubmitReadingRequest))
		})
		return func(dur time.Duration) (float64, closedCPU) {
			return closedRun(cfg.callers, dur, e, func(ctx context.Context, i int) error {
				return ccs[i%len(ccs)].Invoke(ctx, echoMethod, readings[i], new(pb.SubmitReadingRequest))
			})
		}, err
	}
	sharedConns, err := dial(r.c.addr, 32)
	if err != nil {
		return res, err
	}
	var shared []rpcpb.StationServiceClient
	for _, c := range sharedConns {
		shared = append(shared, rpcpb.NewStationServiceClient(c))
	}
	// Caller i is station i: it alone touches the station and sent[i].
	sent := make([]int, len(r.stations))
	flux := func(seats []seat, client func(i int) rpcpb.StationServiceClient) func(time.Duration) (float64, closedCPU) {
		var taken atomic.Int64
		return func(dur time.Duration) (float64, closedCPU) {
			n, cpu := closedRun(cfg.callers, dur, r.c, func(ctx context.Context, i int) error {
				s := r.stations[i]
				if sent[i]%closedRunLength == 0 {
					st := seats[int(taken.Add(1)-1)%len(seats)]
					s.sid, s.bid, s.token = st.sid, st.bid, st.token
				}
				sent[i]++
				_, err := client(i).SubmitReading(ctx, s.reading(), s.creds())
				return err
			})
			// Past the last seat, callers went round again: runs grew by
			// a run length each time.
			res.longestRun = max(res.longestRun, int((taken.Load()+int64(len(seats))-1)/int64(len(seats)))*closedRunLength)
			return n, cpu
		}
	}
	round := cfg.dur / 2
	echoShared, err := echoOver(32)
	if err != nil {
		return res, err
	}
	seats, err := r.takeSeats(closedSections)
	if err != nil {
		return res, err
	}
	before := r.c.scrape()
	res.shared = alternate(closedRounds, round, echoShared,
		flux(seats, func(i int) rpcpb.StationServiceClient { return shared[i%len(shared)] }))
	res.shared.judgeWork(before, r.c.scrape())
	if err := r.connectAll(); err != nil {
		return res, err
	}
	echoOwn, err := echoOver(cfg.callers)
	if err != nil {
		return res, err
	}
	if seats, err = r.takeSeats(closedSections); err != nil {
		return res, err
	}
	clear(sent)
	before = r.c.scrape()
	res.own = alternate(closedRounds, round, echoOwn,
		flux(seats, func(i int) rpcpb.StationServiceClient { return r.stations[i].st }))
	res.own.judgeWork(before, r.c.scrape())
	return res, nil
}
