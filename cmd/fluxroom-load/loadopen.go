package main

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sync"
	"sync/atomic"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
)

// The open loop: readings at a set rate, whatever the answers do.

// phase is one open-loop measurement.
type phase struct {
	offered    float64
	stored     int
	elapsed    time.Duration
	ack, watch []time.Duration
	// watchMessages is the room messages the watchers got (each may carry
	// several benches' states; watch has one entry per state delivered).
	watchMessages int
	missing, late int
	failed        int
	serverCPU     float64 // seconds, over the phase
	genCPU        float64
	peakRSS       float64
	floodTried    int
	floodStored   int
	floodRefused  int
	flooders      int
	// serverP50 and serverP99 bound the time the server itself took per
	// SubmitReading (the upper bounds of its latency histogram's buckets),
	// to tell the server's share of a tail from the network's and the load
	// generator's.
	serverP50, serverP99 float64
	// commits and committed are the store's group commits in the phase and
	// the readings they held; commitP50 and commitP99 bound their time, as
	// serverP50 does a call's.
	commits, committed   float64
	commitP50, commitP99 float64
	// judgeP99 bounds the judge passes' lag from a reading's commit to its
	// bench's state published (the server's fluxroom_judge_lag_seconds).
	judgeP99 float64
	// judgings is how many benches the room judges judged (each once per
	// pass however many of its readings came): over stored, how much of
	// the judging coalesced.
	judgings float64
	// ackFlood are the acknowledgements of readings due while the flooding
	// station was on; ack then holds those due while it was quiet.
	ackFlood []time.Duration
}

// floodWindow is how long the flooding station is on, then off, in turn:
// quiet and flooded readings share the machine's noise, where two phases
// one after the other would not.
const floodWindow = 250 * time.Millisecond

func flooding(start, t time.Time) bool { return (t.Sub(start)/floodWindow)%2 == 1 }

// lateAfter is when a verdict counts as late at the dashboard: well past
// any target, long before a group would leave the bench.
const lateAfter = 100 * time.Millisecond

// arrival is when a watcher first saw a bench at a reading count.
type arrival struct {
	count int32
	at    time.Time
}

// schedule hands out the due times of readings arriving at rate from start
// for dur (exponential inter-arrival times, so bursts happen as they do),
// each to one of the queues at random, and then closes the queues. The
// seed depends on the queues and the rate alone, so the server and the
// echo baseline see the same arrivals.
func schedule(queues []chan time.Time, rate float64, dur time.Duration, start time.Time) {
	rng := rand.New(rand.NewPCG(uint64(len(queues)), uint64(rate)))
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
		queues[rng.IntN(len(queues))] <- next
	}
	for _, q := range queues {
		close(q)
	}
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
		// messages counts the room's messages after the snapshot: each
		// carries the changes that waited for the stream's last write.
		messages int
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
			// A watcher that stops early (an event that does not parse)
			// shows as verdicts missing at watchers.
			err := webWatch(ctx, r.c.addr, wl.sid, func(m []byte) error {
				if snapshot {
					snapshot = false
					first <- nil
					return nil
				}
				now := time.Now()
				wl.mu.Lock()
				defer wl.mu.Unlock()
				wl.messages++
				return changedBenches(m, func(bid uint64, count int32) {
					wl.events[bid] = append(wl.events[bid], arrival{count, now})
				})
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

	const submitMethod = "/fluxroom.v1.StationService/SubmitReading"
	submitLabels := fmt.Sprintf("method=%q,", submitMethod)
	before := r.c.scrape()
	r.c.resetPeak()
	cpu0, gen0 := r.c.cpu(), selfCPU()
	schedule(queues, rate, dur, start)
	swg.Wait()
	fcancel()
	fwg.Wait()
	ph.elapsed = time.Since(start)
	ph.serverCPU, ph.genCPU = r.c.cpu()-cpu0, selfCPU()-gen0
	after := r.c.scrape()
	hist0, hist1 := before.histogram("fluxroom_rpc_seconds", submitLabels), after.histogram("fluxroom_rpc_seconds", submitLabels)
	commits0, commits1 := before.histogram("fluxroom_commit_seconds", ""), after.histogram("fluxroom_commit_seconds", "")
	ph.serverP50, ph.serverP99 = bucketQuantile(hist0, hist1, 0.5), bucketQuantile(hist0, hist1, 0.99)
	ph.commitP50, ph.commitP99 = bucketQuantile(commits0, commits1, 0.5), bucketQuantile(commits0, commits1, 0.99)
	lag0, lag1 := before.histogram("fluxroom_judge_lag_seconds", ""), after.histogram("fluxroom_judge_lag_seconds", "")
	ph.judgeP99 = bucketQuantile(lag0, lag1, 0.99)
	ph.judgings = after.value("fluxroom_bench_judgings_total") - before.value("fluxroom_bench_judgings_total")
	ph.commits = commits1[math.Inf(1)] - commits0[math.Inf(1)]
	ph.committed = after.value("fluxroom_committed_readings_total") - before.value("fluxroom_committed_readings_total")
	_, ph.peakRSS = r.c.mem()
	// Let the last events reach the watchers, then stop them.
	time.Sleep(300 * time.Millisecond)
	cancel()
	wwg.Wait()

	ph.stored, ph.failed = len(acks), int(failed.Load())
	ph.floodTried, ph.floodStored, ph.floodRefused = int(floodTried.Load()), int(floodStored.Load()), int(floodRefused.Load())
	for _, wl := range logs {
		ph.watchMessages += wl.messages
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
