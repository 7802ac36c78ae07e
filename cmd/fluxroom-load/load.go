package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"runtime"
	"runtime/debug"
	"strconv"
	"strings"
	"time"

	"example.com/fluxroom/internal/cpuprofile"
	"example.com/fluxroom/store"
)

// loadConfig is one run of the scale benchmark.
type loadConfig struct {
	// fluxroom is the program whose servers are measured.
	fluxroom           string
	stations, watchers []int
	light, heavy       float64
	// perStation caps each station's pace: a data logger's, far above a
	// group typing by hand, so few stations cannot carry a room's rate.
	perStation float64
	dur        time.Duration
	callers    int
	flooders   int
	profile    string
	memLimit   string
	gcPercent  int
}

// The sweep's servers run with the station rate limit a department would
// set for benches with data loggers; the closed loop lifts it to measure
// the ceiling.
const (
	loadStationRate  = "20"
	loadStationBurst = "40"
	loadKey          = "load-test-admin-key-0000000"
	loadGenGCPercent = 400
)

// run is the scale benchmark behind `make bench`: real servers as child
// processes on loopback with temporary bbolt files, stations on their own
// connections submitting open loop, watchers on the room streams, and the
// baselines its figures are divided by, measured in the same run.
func run(ctx context.Context, stdout, stderr io.Writer, args []string) error {
	fs := newFlags("fluxroom-load", stderr)
	fluxroom := fs.String("fluxroom", "bin/fluxroom", "the fluxroom program to measure (make build writes bin/fluxroom)")
	full := fs.Bool("full", false, "the full sweep: M = 30, 512, 5000 stations, W = 1, 100 watchers, 5 s phases")
	stations := fs.String("stations", "", "comma-separated station counts to sweep (default 100,512; 30,512,5000 with --full)")
	watchers := fs.String("watchers", "1,100", "comma-separated watcher counts to sweep")
	light := fs.Float64("light", 1000, "light open-loop load, readings per second")
	heavy := fs.Float64("heavy", 5000, "heavy open-loop load, readings per second")
	perStation := fs.Float64("per-station", 10, "most readings per second one station sends in the open loop")
	dur := fs.Duration("duration", 0, "length of each phase (default 1.5 s; 5 s with --full)")
	callers := fs.Int("callers", 512, "concurrent callers of the closed loop and its echo baseline")
	flooders := fs.Int("flooders", 4, "concurrent callers of the one flooding station in the fairness phase")
	memLimit := fs.String("server-memory-limit", "", "run the measured servers with serve --memory-limit (e.g. 300MiB, or none)")
	gcPercent := fs.Int("server-gc-percent", 0, "run the measured servers with serve --gc-percent")
	profile := fs.String("server-cpuprofile", "", "write each measured server's CPU profile to PREFIX-closed.prof and PREFIX-M-W.prof")
	genProfile := fs.String("cpuprofile", "", "write the load generator's own CPU profile to this file")
	if err := parse(fs, args); err != nil {
		return err
	}
	// The load generator shares the cores with the server it measures: its
	// own collector runs seldom, memory being no concern of its.
	if _, fromEnv := os.LookupEnv("GOGC"); !fromEnv {
		debug.SetGCPercent(loadGenGCPercent)
	}
	stopProfile, err := cpuprofile.Start(*genProfile)
	if err != nil {
		return err
	}
	defer stopProfile()
	cfg := loadConfig{fluxroom: *fluxroom, watchers: ints(*watchers), light: *light, heavy: *heavy, perStation: *perStation,
		dur: *dur, callers: *callers, flooders: *flooders, profile: *profile, memLimit: *memLimit, gcPercent: *gcPercent}
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
		return usageError{"--stations, --watchers, --light, --heavy and --callers must be positive"}
	}
	if _, err := os.Stat(cfg.fluxroom); err != nil {
		return usageError{fmt.Sprintf("--fluxroom %s: %v (run make build first)", cfg.fluxroom, err)}
	}
	return runLoadtest(stdout, cfg)
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

	shared, err := echoBaseline(cfg.callers, 32, cfg.dur)
	if err != nil {
		return fmt.Errorf("echo baseline: %w", err)
	}
	own, err := echoBaseline(cfg.callers, cfg.callers, cfg.dur)
	if err != nil {
		return fmt.Errorf("echo baseline: %w", err)
	}
	echo, echoCPU, echoOwn, echoOwnCPU := shared.echo, shared.echoCPU, own.echo, own.echoCPU
	fmt.Fprintf(w, "baseline echo: bare grpc-go via grpc.Server.Serve returning the reading it is sent, %d callers: over 32 connections %.0f calls/s, server CPU %.0f µs/call (load generator %.0f); one connection each %.0f calls/s, %.0f µs/call (load generator %.0f)\n",
		cfg.callers, echo, echoCPU.server*1e6, echoCPU.gen*1e6, echoOwn, echoOwnCPU.server*1e6, echoOwnCPU.gen*1e6)
	fmt.Fprintf(w, "  the empty call (health Check) beside it: over 32 connections %.0f calls/s, server CPU %.0f µs/call; one connection each %.0f calls/s, %.0f µs/call\n",
		shared.empty, shared.emptyCPU.server*1e6, own.empty, own.emptyCPU.server*1e6)
	// The light load's spacing of commits: a disk syncs more slowly after a
	// pause than back to back.
	pause := time.Duration(float64(time.Second) / cfg.light)
	bare, err := store.BareBaselines(dir, cfg.dur, pause)
	if err != nil {
		return fmt.Errorf("bbolt baseline: %w", err)
	}
	fmt.Fprintf(w, "baseline bbolt: 100-byte appends, one Update each %.0f/s (commit with its fsyncs %s; each after a %v pause, as at %.0f/s: p50 %.2f ms); one writer committing what 512 goroutines queued %.0f/s\n",
		bare.Single, ms3(bare.Commits), pause, cfg.light, quantile(bare.Paused, 0.5), bare.Group)

	cl, err := closedLoops(dir, cfg)
	if err != nil {
		return fmt.Errorf("closed loop: %w", err)
	}
	fmt.Fprintf(w, "\nclosed loop, %d callers, each reading durable before its answer and judged after it; a caller sends %d readings to a bench, then takes an unused one (%d lab sections joined; longest run %d); %d rounds each between two of the echo over the same connections, ratios of the median round:\n",
		cfg.callers, closedRunLength, closedSections, cl.longestRun, closedRounds)
	for _, x := range []struct {
		name string
		t    closedTopology
	}{{"over 32 shared connections:", cl.shared}, {"one connection per station: ", cl.own}} {
		fmt.Fprintf(w, "  %s %6.0f readings/s = %.2f × echo (%.0f calls/s), %.2f × bbolt group commit; server CPU %.0f µs/reading = %.1f × echo's per call (%.0f µs; rounds %s); load generator %.0f µs = %.1f ×; %.2f judge passes and %.2f judgings per reading\n",
			x.name, x.t.rate, x.t.rateRatio(), x.t.echoRate, x.t.rate/bare.Group, x.t.cpu.server*1e6, x.t.cpuRatio(), x.t.echoCPU.server*1e6, ratios(x.t.cpuRatios), x.t.cpu.gen*1e6, x.t.genRatio(), x.t.passes, x.t.judgings)
	}

	var points []sweepPoint
	for _, ms := range cfg.stations {
		echoes, err := echoOpenLoop(ms, []float64{cfg.capRate(cfg.light, ms), cfg.capRate(cfg.heavy, ms)}, cfg.dur)
		if err != nil {
			return fmt.Errorf("M=%d: echo baseline: %w", ms, err)
		}
		for _, ws := range cfg.watchers {
			p, err := sweep(dir, cfg, ms, ws)
			if err != nil {
				return fmt.Errorf("M=%d W=%d: %w", ms, ws, err)
			}
			p.echoLight, p.echoHeavy = echoes[0], echoes[1]
			p.print(w)
			points = append(points, p)
		}
	}
	summarize(w, cfg, cl, points, quantile(bare.Commits, 0.5), quantile(bare.Paused, 0.5))
	return nil
}

// collectorArgs are the serve flags that set the collector of every server
// the program measures.
func (cfg loadConfig) collectorArgs() []string {
	var args []string
	if cfg.gcPercent > 0 {
		args = append(args, "--gc-percent", strconv.Itoa(cfg.gcPercent))
	}
	if cfg.memLimit != "" {
		args = append(args, "--memory-limit", cfg.memLimit)
	}
	return args
}

// capRate is an open-loop rate as n stations can offer it, each sending at
// most perStation readings a second.
func (cfg loadConfig) capRate(rate float64, n int) float64 {
	return min(rate, cfg.perStation*float64(n))
}

// sweepPoint is one M × W point of the sweep.
type sweepPoint struct {
	stations, watchers int
	startup, restart   time.Duration
	idleConnBytes      float64
	light, heavy       phase
	fair               phase
	// echoLight and echoHeavy are the bare echo under the light and heavy
	// phases' rates over as many connections.
	echoLight, echoHeavy openEcho
	diskPerReading       float64 // the file at the end, over every reading
	usedPerReading       float64 // its pages in use, likewise
	// growthPerReading is how much the pages in use grew over the heavy
	// phase, per reading stored in it: the cost of a reading alone, the
	// sections' sessions and benches being written before.
	growthPerReading float64
}

func sweep(dir string, cfg loadConfig, stations, watchers int) (sweepPoint, error) {
	p := sweepPoint{stations: stations, watchers: watchers}
	// The sections follow one another within seconds here, where a real
	// room is hours apart: a quiet room leaves memory after a second.
	args := append([]string{"--station-rate", loadStationRate, "--station-burst", loadStationBurst, "--room-idle", "1s"}, cfg.collectorArgs()...)
	if cfg.profile != "" {
		args = append(args, "--cpuprofile", fmt.Sprintf("%s-%d-%d.prof", cfg.profile, stations, watchers))
	}
	r, startup, err := newLoadRoom(cfg.fluxroom, dir, stations, false, args...)
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

	capRate := func(rate float64) float64 { return cfg.capRate(rate, stations) }
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
		used0 := r.c.scrape().value("fluxroom_db_used_bytes")
		if *ph.out, err = openLoop(r, ph.rate, cfg.dur, ph.watch, ph.flooder); err != nil {
			r.c.kill()
			return p, err
		}
		if ph.out == &p.heavy {
			p.growthPerReading = (r.c.scrape().value("fluxroom_db_used_bytes") - used0) / float64(max(1, p.heavy.stored))
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
	c, restart, err := startChild(r.fluxroom, "serve", "--db", r.db, "--log-level", "error", "--admin-key", loadKey)
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
		echo openEcho
	}{{"light", p.light, p.echoLight}, {"heavy", p.heavy, p.echoHeavy}} {
		ph := x.ph
		rate := float64(ph.stored) / ph.elapsed.Seconds()
		fmt.Fprintf(w, "  %-5s %5.0f/s offered, %5.0f/s durable; submit→ack %s (inside the server p50 ≤ %g p99 ≤ %g ms); submit→watcher %s over %d deliveries in %d messages\n",
			x.name, ph.offered, rate, ms3(ph.ack), ph.serverP50, ph.serverP99, ms3(ph.watch), len(ph.watch), ph.watchMessages)
		fmt.Fprintf(w, "        verdicts missing at watchers %d, late (> %s) %d, failed submits %d; server CPU %.0f µs/reading (load generator %.0f); server peak RSS %.0f MB\n",
			ph.missing, lateAfter, ph.late, ph.failed, ph.serverCPU/float64(max(1, ph.stored))*1e6, ph.genCPU/float64(max(1, ph.stored))*1e6, ph.peakRSS/1e6)
		fmt.Fprintf(w, "        group commits %.0f/s of %.1f readings each, p50 ≤ %g p99 ≤ %g ms with their fsyncs; judge lag (commit → state published) p99 ≤ %g ms, %.2f judgings per reading\n",
			ph.commits/ph.elapsed.Seconds(), ph.committed/max(1, ph.commits), ph.commitP50, ph.commitP99, ph.judgeP99, ph.judgings/float64(max(1, ph.stored)))
		e := x.echo.latencies
		fmt.Fprintf(w, "        baseline: the bare echo at %.0f/s over %d connections %s, server CPU %.0f µs/call; submit→ack p50 %.1f × its p50, p99 %.1f × its p99\n",
			x.echo.rate, p.stations, ms3(e), x.echo.serverCPU*1e6, ratio(quantile(ph.ack, 0.5), quantile(e, 0.5)), ratio(quantile(ph.ack, 0.99), quantile(e, 0.99)))
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

// ratios prints a list of ratios, "2.6, 2.8, 2.7".
func ratios(xs []float64) string {
	parts := make([]string, len(xs))
	for i, x := range xs {
		parts[i] = strconv.FormatFloat(x, 'f', 2, 64)
	}
	return strings.Join(parts, ", ")
}

func ms(d time.Duration) float64 { return float64(d.Microseconds()) / 1000 }

// ratio is a / b, or 0 when there is no b to divide by.
func ratio(a, b float64) float64 {
	if b <= 0 {
		return 0
	}
	return a / b
}

// targetList prints each target with met or MISSED and counts them.
type targetList struct {
	w           io.Writer
	met, missed int
}

func (t *targetList) add(ok bool, format string, args ...any) {
	if ok {
		t.met++
	} else {
		t.missed++
	}
	fmt.Fprintf(t.w, "  "+format+": %s\n", append(args, mark(ok))...)
}

// summarize prints the targets, as ratios to the baselines measured in the
// same run where the machine's speed decides them (#14), and ends with the
// count met and missed. bareCommitP50 is one bare bbolt commit's p50, ms,
// back to back, as the target states it; pausedCommitP50 after the light
// load's spacing, printed beside it.
func summarize(w io.Writer, cfg loadConfig, cl closedResult, points []sweepPoint, bareCommitP50, pausedCommitP50 float64) {
	fmt.Fprintf(w, "\ntargets\n")
	t := &targetList{w: w}
	t.add(cl.shared.cpuRatio() <= 2.5,
		"server CPU per durable judged reading, closed loop over 32 connections, ≤ 2.5 × the echo's per call: %.1f × (median of rounds %s; %.0f µs against %.0f over all)",
		cl.shared.cpuRatio(), ratios(cl.shared.cpuRatios), cl.shared.cpu.server*1e6, cl.shared.echoCPU.server*1e6)
	t.add(cl.shared.rateRatio() >= 0.5, "durable judged ingest at %d callers ≥ 0.5 × echo over 32 connections: %.2f (rounds %s)", cfg.callers, cl.shared.rateRatio(), ratios(cl.shared.rateRatios))
	t.add(cl.own.rateRatio() >= 0.6, "durable judged ingest at %d callers ≥ 0.6 × echo over one connection each: %.2f (rounds %s)", cfg.callers, cl.own.rateRatio(), ratios(cl.own.rateRatios))
	for _, p := range points {
		if l := p.light; l.offered >= 1000 && p.stations >= 512 && p.watchers == 1 {
			bound := quantile(p.echoLight.latencies, 0.5) + bareCommitP50 + 0.3
			t.add(quantile(l.ack, 0.5) <= bound, "light %.0f/s, M=%d W=%d: submit p50 ≤ echo p50 + bare commit p50 + 0.3 ms: %.2f ≤ %.2f + %.2f + 0.3 ms (with a bare commit after the light load's pause, %.2f)",
				l.offered, p.stations, p.watchers, quantile(l.ack, 0.5), quantile(p.echoLight.latencies, 0.5), bareCommitP50,
				quantile(p.echoLight.latencies, 0.5)+pausedCommitP50+0.3)
		}
		if h := p.heavy; h.offered >= 5000 && p.stations >= 512 && p.stations < 5000 {
			r99 := ratio(quantile(h.watch, 0.99), quantile(p.echoHeavy.latencies, 0.99))
			r999 := ratio(quantile(h.watch, 0.999), quantile(p.echoHeavy.latencies, 0.999))
			t.add(r99 <= 2 && r999 <= 2 && h.missing == 0, "heavy %.0f/s, M=%d W=%d: submit→dashboard p99 and p999 ≤ 2 × the echo's, none dropped: %.1f ×, %.1f ×, %d dropped",
				h.offered, p.stations, p.watchers, r99, r999, h.missing)
			t.add(h.judgeP99 <= 200, "heavy %.0f/s, M=%d W=%d: judge lag p99 ≤ 200 ms: ≤ %g ms", h.offered, p.stations, p.watchers, h.judgeP99)
		}
		ratio := quantile(p.fair.ackFlood, 0.99) / quantile(p.fair.ack, 0.99)
		t.add(ratio <= 2, "fairness M=%d W=%d: others' p99 with a flooding station ≤ 2 × quiet: %.2f ×", p.stations, p.watchers, ratio)
	}
	last := points[len(points)-1]
	t.add(last.idleConnBytes <= 30*1024, "idle connection ≤ 30 KB: %.1f KB at M=%d", last.idleConnBytes/1024, last.stations)
	for _, p := range points {
		if p.stations >= 5000 {
			peak := max(p.light.peakRSS, p.heavy.peakRSS)
			t.add(peak <= 300e6, "peak RSS at %d stations under %.0f/s ≤ 300 MB: %.0f MB", p.stations, p.heavy.offered, peak/1e6)
		}
	}
	worstRestart, worstDisk := time.Duration(0), 0.0
	for _, p := range points {
		worstRestart, worstDisk = max(worstRestart, p.restart), max(worstDisk, p.growthPerReading)
	}
	t.add(worstRestart < 100*time.Millisecond, "restart to serving < 100 ms: worst %.0f ms", ms(worstRestart))
	t.add(worstDisk <= 250, "≤ 250 MB per million readings on disk: the file's pages in use grew by at most %.0f bytes per reading", worstDisk)
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
		t.add(sp[1]/sp[0] <= 1.25, "server CPU per reading flat across M at %.0f/s, W=%d (highest / lowest ≤ 1.25): %s; %.2f",
			k.rate, k.watchers, strings.Join(groups[k], ", "), sp[1]/sp[0])
	}
	fmt.Fprintf(w, "targets: %d met, %d missed\n", t.met, t.missed)
}
