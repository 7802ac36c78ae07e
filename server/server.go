package server

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"net/http/pprof"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"connectrpc.com/vanguard"
	"connectrpc.com/vanguard/vanguardgrpc"
	"github.com/soheilhy/cmux"
	"golang.org/x/time/rate"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/reflection"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/export"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

// Config holds what a Server needs. DB and Logger are required.
type Config struct {
	DB     *store.DB
	Logger *slog.Logger
	// Now is the clock; nil means time.Now.
	Now func() time.Time
	// Tolerance turns discrepancies into verdicts; zero means
	// domain.DefaultTolerance.
	Tolerance domain.Tolerance
	// Web serves the dashboard for every path that is not an RPC; nil
	// serves 404s.
	Web http.Handler
	// StallAfter is how long a bench may go without a reading, while
	// others progress, before it shows as stalled. Default 10 minutes.
	StallAfter time.Duration
	// StallCheck is how often stalls are looked for. Default 15 s, or
	// half of RoomIdle when that is shorter.
	StallCheck time.Duration
	// RoomIdle is how long a room nobody watches stays in memory after its
	// last reading: then it leaves the cache (and its judge stops) until
	// someone needs it again. Default 10 minutes.
	RoomIdle time.Duration
	// InstructorKey, when set, is the instructor's credential (its hash is
	// stored). When empty and none is stored, New makes one: ShownKey
	// returns it, to be shown once.
	InstructorKey string
	// StationRate and StationBurst limit each bench's readings per second;
	// zero means the defaults (5/s, bursts of 20).
	StationRate  float64
	StationBurst int
	// StationHold is how long a reading over its bench's rate waits for
	// the bench's next turn before it is refused; a refusal also comes
	// only after this wait. Default 250 ms.
	StationHold time.Duration
	// MaxMessageBytes bounds one request; default 64 KiB, far above any
	// reading.
	MaxMessageBytes int
	// FailPoint, when set, is called at each stage of a submission
	// ("received", "committed", "replying"); an error it returns fails the
	// call there. Tests use it to show that nothing is acknowledged before
	// it is committed.
	FailPoint func(stage string) error
	// AckBeforeCommit makes SubmitReading reply before its reading is
	// written. It exists only as the negative control of the durability
	// test, which must show that it loses readings; never use it.
	AckBeforeCommit bool
}

// Server serves the fluxroom API on one listener.
type Server struct {
	db    *store.DB
	log   *slog.Logger
	now   func() time.Time
	tol   domain.Tolerance
	hub   *hub
	rooms rooms
	// closed remembers which sessions are closed (session id → bool).
	closed  sync.Map
	auth    *auth
	shown   string
	metrics *metrics
	grpc    *grpc.Server
	// stallAfter, stallCheck and roomIdle: see Config.
	stallAfter, stallCheck, roomIdle time.Duration
	failPoint                        func(string) error
	ackBeforeCommit                  bool
	http                             *http.Server
	health                           *health.Server

	// skipJudging leaves committed readings unjudged: set only by
	// BenchmarkSubmitReading, to show what judging costs a reading.
	skipJudging bool

	// judges holds each session's roomJudge. The judges and the ticker
	// run through goBackground, so Shutdown can wait for them.
	judges     sync.Map
	background sync.WaitGroup
	stopMu     sync.Mutex
	stopping   bool
	// benches caches the benches stations submit to, so a reading costs no
	// read of the file before its write.
	benches benchCache

	ridPrefix string
	ridNext   atomic.Uint64

	mu   sync.Mutex
	mux  cmux.CMux
	done chan struct{}
}

// maxStreamsPerConn bounds one connection's calls in flight: a station
// sends one reading at a time and a dashboard holds one room stream.
const maxStreamsPerConn = 128

// connBufferSize is each connection's read and write buffer, against
// grpc-go's default of 32 KiB each: 5 000 stations' read buffers take
// 10 MB instead of 160. A station's reading (its HEADERS and DATA frames, a
// few hundred bytes) still comes in one read.
const connBufferSize = 2 << 10

// streamWorkers is how many goroutines wait for calls; a call that finds
// them all busy (most of them wait for a commit's fsync) gets a goroutine
// of its own, as without workers.
const streamWorkers = 256

// staticWindow is each stream's and connection's flow-control window: far
// above any message fluxroom sends, so no stream waits for a window update.
const staticWindow = 1 << 20

// New builds a Server; Serve starts it.
func New(cfg Config) (*Server, error) {
	if cfg.DB == nil || cfg.Logger == nil {
		return nil, errors.New("server: Config needs DB and Logger")
	}
	s := &Server{db: cfg.DB, log: cfg.Logger, now: cfg.Now, tol: cfg.Tolerance, hub: newHub(), done: make(chan struct{}),
		ridPrefix: strconv.FormatInt(time.Now().Unix()%(1<<24), 36) + "-"}
	if s.now == nil {
		s.now = time.Now
	}
	if s.tol == (domain.Tolerance{}) {
		s.tol = domain.DefaultTolerance
	}
	// Ten minutes without a reading is long in a lab where a point takes
	// one or two // common practice.
	s.stallAfter, s.stallCheck = cfg.StallAfter, cfg.StallCheck
	s.failPoint, s.ackBeforeCommit = cfg.FailPoint, cfg.AckBeforeCommit
	if s.stallAfter == 0 {
		s.stallAfter = 10 * time.Minute
	}
	s.roomIdle = cfg.RoomIdle
	if s.roomIdle == 0 {
		s.roomIdle = 10 * time.Minute
	}
	if s.stallCheck == 0 {
		s.stallCheck = min(15*time.Second, s.roomIdle/2)
	}
	a, shown, err := setUpAuth(cfg.DB, cfg.InstructorKey)
	if err != nil {
		return nil, err
	}
	s.auth, s.shown, s.metrics = a, shown, newMetrics()
	cfg.DB.OnCommit(s.metrics.commit)
	s.auth.rate, s.auth.burst = rate.Limit(stationRateDefault), stationBurstDefault
	if cfg.StationRate > 0 {
		s.auth.rate = rate.Limit(cfg.StationRate)
	}
	if cfg.StationBurst > 0 {
		s.auth.burst = cfg.StationBurst
	}
	s.auth.hold = cfg.StationHold
	if s.auth.hold == 0 {
		s.auth.hold = stationHoldDefault
	}
	maxMsg := cfg.MaxMessageBytes
	if maxMsg == 0 {
		maxMsg = 64 << 10
	}
	s.grpc = grpc.NewServer(
		grpc.MaxRecvMsgSize(maxMsg),
		// Static flow-control windows: messages here are small, and the
		// dynamic window's bandwidth probe costs a ping round trip per
		// burst on every station's connection.
		grpc.InitialWindowSize(staticWindow),
		grpc.InitialConnWindowSize(staticWindow),
		// A reading is a few hundred bytes: small per-connection buffers,
		// and idle connections give their write buffer back, keep the
		// memory of a campus of stations in bounds.
		grpc.ReadBufferSize(connBufferSize),
		grpc.WriteBufferSize(connBufferSize),
		grpc.SharedWriteBuffer(true),
		grpc.ForceServerCodecV2(newCodec()),
		// Readings over the rate are held, not refused at once: bound the
		// calls one connection can have waiting.
		grpc.MaxConcurrentStreams(maxStreamsPerConn),
		// Calls run on long-lived goroutines whose stacks have grown
		// already, instead of a new goroutine per call that grows its
		// stack on every reading.
		grpc.NumStreamWorkers(streamWorkers),
		grpc.ChainUnaryInterceptor(s.unaryErrors, s.unaryAuth),
		grpc.ChainStreamInterceptor(s.streamErrors, s.streamAuth),
	)
	rpcpb.RegisterStationServiceServer(s.grpc, stationService{s: s})
	rpcpb.RegisterInstructorServiceServer(s.grpc, instructorService{s: s})
	s.health = health.NewServer()
	healthpb.RegisterHealthServer(s.grpc, s.health)
	reflection.Register(s.grpc)
	for _, name := range []string{"", rpcpb.StationService_ServiceDesc.ServiceName, rpcpb.InstructorService_ServiceDesc.ServiceName} {
		s.health.SetServingStatus(name, healthpb.HealthCheckResponse_SERVING)
	}

	web := cfg.Web
	if web == nil {
		web = http.NotFoundHandler()
	}
	mux := http.NewServeMux()
	mux.HandleFunc("/metrics", s.serveMetrics)
	// The Go runtime's profiles, for the instructor key only: they show
	// what the server spends its CPU and memory on.
	mux.Handle("/debug/pprof/", s.instructorOnly(http.HandlerFunc(pprof.Index)))
	mux.Handle("/debug/pprof/profile", s.instructorOnly(http.HandlerFunc(pprof.Profile)))
	mux.Handle("/", web)
	web = mux
	// The browser speaks gRPC-Web over HTTP/1.1; vanguard translates it to
	// calls on the same grpc.Server. Native gRPC never takes this path.
	tc, err := vanguardgrpc.NewTranscoder(s.grpc, vanguard.WithUnknownHandler(web))
	if err != nil {
		return nil, fmt.Errorf("server: gRPC-Web transcoder: %w", err)
	}
	var protocols http.Protocols
	protocols.SetHTTP1(true)
	protocols.SetUnencryptedHTTP2(true)
	s.http = &http.Server{Handler: tc, Protocols: &protocols, ReadHeaderTimeout: 10 * time.Second,
		ErrorLog: slog.NewLogLogger(cfg.Logger.Handler(), slog.LevelWarn)}
	return s, nil
}

// Serve accepts connections on l until Shutdown. Native gRPC connections
// (HTTP/2 with content-type application/grpc) go to grpc.Server.Serve, which
// is about twice as fast as its ServeHTTP path; everything else goes to the
// HTTP server (gRPC-Web, the dashboard).
func (s *Server) Serve(l net.Listener) error {
	m := cmux.New(l)
	// grpc-go clients wait for the server's SETTINGS before they send
	// headers, so the matcher answers with one. That would break a
	// browser's HTTP/2 connection (its server sends SETTINGS again), which
	// is why Serve is for plaintext, where browsers speak HTTP/1.1, and
	// ServeAllHTTP is for TLS.
	grpcL := m.MatchWithWriters(
		cmux.HTTP2MatchHeaderFieldSendSettings("content-type", "application/grpc"),
		cmux.HTTP2MatchHeaderFieldSendSettings("content-type", "application/grpc+proto"),
	)
	httpL := m.Match(cmux.Any())
	s.mu.Lock()
	s.mux = m
	s.mu.Unlock()
	errc := make(chan error, 2)
	go func() { errc <- s.grpc.Serve(grpcL) }()
	go func() { errc <- s.http.Serve(httpL) }()
	s.startTicker()
	err := m.Serve()
	select {
	case <-s.done:
		return nil
	default:
	}
	if err != nil && !errors.Is(err, net.ErrClosed) {
		return fmt.Errorf("server: serve: %w", err)
	}
	return nil
}

// ServeAllHTTP serves every connection through the HTTP server: native gRPC
// too, by way of grpc.Server.ServeHTTP, which is slower than Serve's path
// but shares a TLS connection's HTTP/2 with browsers safely. Use it for TLS
// listeners.
func (s *Server) ServeAllHTTP(l net.Listener) error {
	s.startTicker()
	err := s.http.Serve(l)
	select {
	case <-s.done:
		return nil
	default:
	}
	if errors.Is(err, http.ErrServerClosed) || errors.Is(err, net.ErrClosed) {
		return nil
	}
	return fmt.Errorf("server: serve: %w", err)
}

// startTicker runs the room's stall checks and the store's health check.
func (s *Server) startTicker() {
	s.goBackground(func() {
		t := time.NewTicker(s.stallCheck)
		defer t.Stop()
		for {
			select {
			case <-s.done:
				return
			case <-t.C:
				s.checkStalls()
				s.checkStore()
			}
		}
	})
}

// goBackground runs fn on its own goroutine unless the server is shutting
// down, and reports whether it did; Shutdown waits for every such fn.
func (s *Server) goBackground(fn func()) bool {
	s.stopMu.Lock()
	defer s.stopMu.Unlock()
	if s.stopping {
		return false
	}
	s.background.Add(1)
	go func() {
		defer s.background.Done()
		fn()
	}()
	return true
}

// Shutdown ends open room streams (clients reconnect), lets unary calls in
// flight finish until ctx ends, and closes the listener. It does not close
// the DB.
func (s *Server) Shutdown(ctx context.Context) error {
	close(s.done)
	s.health.Shutdown()
	s.hub.close()
	stopped := make(chan struct{})
	go func() { s.grpc.GracefulStop(); close(stopped) }()
	select {
	case <-stopped:
	case <-ctx.Done():
		s.grpc.Stop()
	}
	// The judges and the ticker stop at s.done, before the caller closes
	// the file; a reading not judged yet is in the file and is judged when
	// its room is next loaded.
	s.stopMu.Lock()
	s.stopping = true
	s.stopMu.Unlock()
	s.background.Wait()
	err := s.http.Shutdown(ctx)
	// cmux's listeners share the one socket: whichever server closes it
	// first, the other finds it closed.
	if errors.Is(err, net.ErrClosed) {
		err = nil
	}
	s.mu.Lock()
	if s.mux != nil {
		s.mux.Close()
	}
	s.mu.Unlock()
	return err
}

// checkStore sets the health service from whether the database answers.
func (s *Server) checkStore() {
	st := healthpb.HealthCheckResponse_SERVING
	if err := s.db.Ping(); err != nil {
		s.log.Error("database does not answer", "err", err)
		st = healthpb.HealthCheckResponse_NOT_SERVING
	}
	for _, name := range []string{"", rpcpb.StationService_ServiceDesc.ServiceName, rpcpb.InstructorService_ServiceDesc.ServiceName} {
		s.health.SetServingStatus(name, st)
	}
}

// fail runs the fail point of a submission stage.
func (s *Server) fail(stage string) error {
	if s.failPoint == nil {
		return nil
	}
	return s.failPoint(stage)
}

// ShownKey is the instructor key New made because none was stored or given;
// empty otherwise. Show it once: only its hash is kept.
func (s *Server) ShownKey() string { return s.shown }

// StationToken returns the token JoinBench would give a bench; for tools
// that act for a station, such as the demo.
func (s *Server) StationToken(sessionID, benchID uint64) string {
	return s.auth.stationToken(sessionID, benchID)
}

// instructorOnly lets through HTTP requests that carry the instructor key
// as a bearer token.
func (s *Server) instructorOnly(h http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		tok, _ := strings.CutPrefix(r.Header.Get("Authorization"), "Bearer ")
		if !s.auth.isInstructor(strings.TrimSpace(tok)) {
			http.Error(w, "this needs the instructor key (Authorization: Bearer <key>)", http.StatusUnauthorized)
			return
		}
		h.ServeHTTP(w, r)
	})
}

// requestID names a call in the logs: the process's start time and a
// counter, unique per process and free to make. A unary call's caller gets
// it as the x-request-id header when it has log lines to find: when it
// failed, or when every call is logged (debug level).
func (s *Server) requestID() string {
	return s.ridPrefix + strconv.FormatUint(s.ridNext.Add(1), 36)
}

func (s *Server) unaryErrors(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	start := time.Now()
	resp, err := handler(ctx, req)
	debug := s.log.Enabled(ctx, slog.LevelDebug)
	// The id and its header cost every answer; one nobody will look up in
	// the logs goes without.
	var rid string
	if err != nil || debug {
		rid = s.requestID()
		grpc.SetHeader(ctx, metadata.MD{"x-request-id": []string{rid}})
	}
	if err != nil {
		err = toStatus(ctx, s.log.With("request_id", rid), info.FullMethod, err)
	}
	d := time.Since(start)
	s.metrics.observe(info.FullMethod, d)
	if debug {
		s.log.DebugContext(ctx, "rpc", "request_id", rid, "method", info.FullMethod, "code", status.Code(err).String(), "ms", float64(d.Microseconds())/1000)
	}
	if status.Code(err) == codes.InvalidArgument {
		s.metrics.rejected.Add(1)
	}
	return resp, err
}

func (s *Server) streamErrors(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	rid := s.requestID()
	ss.SetHeader(metadata.Pairs("x-request-id", rid))
	log := s.log.With("request_id", rid)
	log.DebugContext(ss.Context(), "stream opened", "method", info.FullMethod)
	err := toStatus(ss.Context(), log, info.FullMethod, handler(srv, ss))
	log.DebugContext(ss.Context(), "stream closed", "method", info.FullMethod, "code", status.Code(err).String())
	return err
}

// bench loads a bench named by a request, as a field error when it is not
// there.
func (s *Server) bench(sessionID, benchID uint64) (domain.Bench, error) {
	if sessionID == 0 {
		return domain.Bench{}, domain.Invalid("session_id", "is missing")
	}
	if benchID == 0 {
		return domain.Bench{}, domain.Invalid("bench_id", "is missing")
	}
	if b, ok := s.benches.get(sessionID, benchID); ok {
		return b, nil
	}
	gen := s.benches.generation(sessionID)
	b, err := s.db.Bench(sessionID, benchID)
	if errors.Is(err, store.ErrNotFound) {
		return domain.Bench{}, domain.Invalid("bench_id", "no bench %d in session %d", benchID, sessionID)
	}
	if err != nil {
		return domain.Bench{}, err
	}
	s.benches.put(sessionID, b, gen)
	return b, nil
}

// benchCache holds benches read from the file. Every write of a session's
// benches calls forget, which also bumps the session's generation, so a
// read that raced with the write is not cached.
type benchCache struct {
	mu  sync.RWMutex
	m   map[[2]uint64]domain.Bench
	gen map[uint64]uint64
}

func (c *benchCache) get(sessionID, benchID uint64) (domain.Bench, bool) {
	c.mu.RLock()
	defer c.mu.RUnlock()
	b, ok := c.m[[2]uint64{sessionID, benchID}]
	return b, ok
}

func (c *benchCache) generation(sessionID uint64) uint64 {
	c.mu.RLock()
	defer c.mu.RUnlock()
	return c.gen[sessionID]
}

func (c *benchCache) put(sessionID uint64, b domain.Bench, gen uint64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.gen[sessionID] != gen {
		return
	}
	if c.m == nil {
		c.m = map[[2]uint64]domain.Bench{}
	}
	c.m[[2]uint64{sessionID, b.ID}] = b
}

// forget drops a session's cached benches; call it after writing them.
func (c *benchCache) forget(sessionID uint64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.gen == nil {
		c.gen = map[uint64]uint64{}
	}
	c.gen[sessionID]++
	for k := range c.m {
		if k[0] == sessionID {
			delete(c.m, k)
		}
	}
}

// benchState reads a bench and its readings and judges them.
func (s *Server) benchState(sessionID, benchID uint64) (*pb.BenchState, domain.Assessment, []domain.Reading, error) {
	if sessionID == 0 {
		return nil, domain.Assessment{}, nil, domain.Invalid("session_id", "is missing")
	}
	b, rs, err := s.db.BenchReadings(sessionID, benchID)
	if errors.Is(err, store.ErrNotFound) {
		return nil, domain.Assessment{}, nil, domain.Invalid("bench_id", "no bench %d in session %d", benchID, sessionID)
	}
	if err != nil {
		return nil, domain.Assessment{}, nil, err
	}
	sess, err := s.db.Session(sessionID)
	if err != nil {
		return nil, domain.Assessment{}, nil, err
	}
	st, a, err := s.judge(sess, b, nil, rs, nil, nil)
	if err != nil {
		return nil, domain.Assessment{}, nil, err
	}
	return st, a, rs, nil
}

// session loads the session a request names, as a field error when there
// is none.
func (s *Server) session(id uint64) (domain.Session, error) {
	sess, err := s.db.Session(id)
	if errors.Is(err, store.ErrNotFound) {
		return domain.Session{}, domain.Invalid("session_id", "no session %d", id)
	}
	return sess, err
}

// graded reads a whole session and grades it under its policy.
func (s *Server) graded(id uint64) (export.Session, error) {
	d, err := s.db.ReadSession(id)
	if errors.Is(err, store.ErrNotFound) {
		return export.Session{}, domain.Invalid("session_id", "no session %d", id)
	}
	if err != nil {
		return export.Session{}, err
	}
	return export.Prepare(d)
}

// checkSupersedes makes sure a correction names an earlier reading of the
// same bench.
func (s *Server) checkSupersedes(sessionID, benchID uint64, readingID, supersedes string) error {
	if err := domain.ValidateReadingID("supersedes", supersedes); err != nil {
		return err
	}
	if supersedes == readingID {
		return domain.Invalid("supersedes", "a reading cannot correct itself")
	}
	_, rs, err := s.db.BenchReadings(sessionID, benchID)
	if err != nil {
		return err
	}
	for _, r := range rs {
		if r.ID == supersedes {
			return nil
		}
	}
	return domain.Invalid("supersedes", "bench %d has no reading %q to correct", benchID, supersedes)
}

// note stores an audit-log entry and republishes the bench, whose alert
// state may have changed.
func (s *Server) note(sessionID uint64, n domain.Note) (*pb.Note, error) {
	if _, err := s.bench(sessionID, n.BenchID); err != nil {
		return nil, err
	}
	if err := domain.ValidateNote(n); err != nil {
		return nil, err
	}
	if err := s.db.AppendNote(sessionID, n); err != nil {
		return nil, err
	}
	if err := s.publishBench(sessionID, n.BenchID); err != nil {
		return nil, err
	}
	return noteToPB(n), nil
}

// rejudgeRoom drops a session's cached room and judges every bench again,
// after a change that affects them all (the tolerance profile).
func (s *Server) rejudgeRoom(sessionID uint64) error {
	mu := s.hub.sessionLock(sessionID)
	mu.Lock()
	s.rooms.drop(sessionID)
	mu.Unlock()
	benches, err := s.db.Benches(sessionID)
	if err != nil {
		return err
	}
	for _, b := range benches {
		if err := s.publishBench(sessionID, b.ID); err != nil {
			return err
		}
	}
	return nil
}

// publishBench reads a bench back from the file after a change other than a
// new reading (its benches, notes, tolerance), judges it and sends its
// state, and the room's findings when they change, to the room's watchers.
func (s *Server) publishBench(sessionID, benchID uint64) error {
	mu := s.hub.sessionLock(sessionID)
	mu.Lock()
	defer mu.Unlock()
	rs, err := s.loadRoom(sessionID)
	if err != nil {
		return err
	}
	b, readings, err := s.db.BenchReadings(sessionID, benchID)
	if err != nil {
		return err
	}
	rs.setBench(b)
	rs.readings[benchID] = readings
	if err := s.judgeCached(rs, benchID, nil); err != nil {
		return err
	}
	now := s.now()
	// Only this bench's flag changes here; checkStalls publishes the others'.
	results := rs.resultList()
	rs.stalled[benchID] = domain.StalledBenches(results, now, s.stallAfter)[benchID]
	s.hub.publish(sessionID, &pb.WatchRoomResponse{Event: &pb.WatchRoomResponse_Bench{Bench: rs.shown(benchID, now)}})
	s.publishFindings(sessionID, rs, results)
	return nil
}

// snapshot is the whole room now, from the room cache.
func (s *Server) snapshot(sess domain.Session) (*pb.RoomSnapshot, error) {
	mu := s.hub.sessionLock(sess.ID)
	mu.Lock()
	defer mu.Unlock()
	rs, err := s.loadRoom(sess.ID)
	if err != nil {
		return nil, err
	}
	now := s.now()
	snap := &pb.RoomSnapshot{Session: sessionToPB(sess), Findings: findingsToPB(rs.findings)}
	for _, st := range rs.states {
		snap.Benches = append(snap.Benches, rs.shown(st.GetBench().GetBenchId(), now))
	}
	slices.SortFunc(snap.Benches, func(a, b *pb.BenchState) int {
		if d := a.GetBench().GetRow() - b.GetBench().GetRow(); d != 0 {
			return int(d)
		}
		return int(a.GetBench().GetColumn() - b.GetBench().GetColumn())
	})
	return snap, nil
}
