package server

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"net/http/pprof"
	"strconv"
	"sync"
	"sync/atomic"
	"time"

	"connectrpc.com/vanguard"
	"connectrpc.com/vanguard/vanguardgrpc"
	"github.com/soheilhy/cmux"
	"golang.org/x/time/rate"
	"google.golang.org/grpc"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/reflection"

	"example.com/fluxroom/domain"
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
	// domain.DefaultTolerance().
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
	// WatchEvery is the shortest time between two messages of one room
	// stream: a change after a quiet spell goes at once, and changes that
	// come sooner wait and go together. Default 50 ms.
	WatchEvery time.Duration
	// AdminKey, when set, is the administrator's credential (its hash is
	// stored). When empty and none is stored, New makes one: ShownKey
	// returns it, to be shown once.
	AdminKey string
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
	closed sync.Map
	// courses remembers each session's course (session id → string).
	courses sync.Map
	// staff holds the staff accounts' keys (staff.go).
	staff   *staffKeys
	auth    *auth
	shown   string
	metrics *metrics
	grpc    *grpc.Server
	// stallAfter, stallCheck, roomIdle and watchEvery: see Config.
	stallAfter, stallCheck, roomIdle, watchEvery time.Duration
	http                                         *http.Server
	health                                       *health.Server

	// hooks are the test switches of a build with -tags failpoints
	// (hooks.go); an empty struct otherwise (hooks_off.go).
	hooks hooks

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

	mu  sync.Mutex
	mux cmux.CMux
	// conns are the plaintext listener's connections, closed at Shutdown:
	// one that never says what it is (an idle gRPC channel sends no
	// headers) would keep cmux's matcher, and so Serve, waiting for ever.
	conns *connSet
	done  chan struct{}
	// shutdownOnce makes Shutdown safe to call again; shutdownErr is what
	// the first call returned.
	shutdownOnce sync.Once
	shutdownErr  error
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
		s.tol = domain.DefaultTolerance()
	}
	// Ten minutes without a reading is long in a lab where a point takes
	// one or two // common practice.
	s.stallAfter, s.stallCheck = cfg.StallAfter, cfg.StallCheck
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
	// A browser redraws the room in 3–8 ms of its main thread (go test
	// -bench DashboardRender ./cmd/fluxroom/): a tab sent every change of a
	// busy room would spend it all on redraws, and the server a write per
	// change per tab. Twenty updates a second are more than an eye follows
	// on a room of tiles // common practice.
	s.watchEvery = cfg.WatchEvery
	if s.watchEvery == 0 {
		s.watchEvery = 50 * time.Millisecond
	}
	a, shown, err := setUpAuth(cfg.DB, cfg.AdminKey)
	if err != nil {
		return nil, err
	}
	s.auth, s.shown, s.metrics = a, shown, newMetrics()
	if s.staff, err = loadStaffKeys(cfg.DB); err != nil {
		return nil, err
	}
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
	rpcpb.RegisterStaffServiceServer(s.grpc, staffService{s: s})
	s.health = health.NewServer()
	healthpb.RegisterHealthServer(s.grpc, s.health)
	reflection.Register(s.grpc)
	for _, name := range []string{"", rpcpb.StationService_ServiceDesc.ServiceName, rpcpb.InstructorService_ServiceDesc.ServiceName, rpcpb.StaffService_ServiceDesc.ServiceName} {
		s.health.SetServingStatus(name, healthpb.HealthCheckResponse_SERVING)
	}

	web := cfg.Web
	if web == nil {
		web = http.NotFoundHandler()
	}
	mux := http.NewServeMux()
	mux.HandleFunc("/metrics", s.serveMetrics)
	mux.HandleFunc("/join.png", s.serveJoinQR)
	// The Go runtime's profiles, for the administrator's key only: they show
	// what the server spends its CPU and memory on.
	mux.Handle("/debug/pprof/", s.adminOnly(http.HandlerFunc(pprof.Index)))
	mux.Handle("/debug/pprof/profile", s.adminOnly(http.HandlerFunc(pprof.Profile)))
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
	cs := &connSet{Listener: l, open: map[net.Conn]struct{}{}}
	m := cmux.New(cs)
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
	s.mux, s.conns = m, cs
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
// the DB. It may be called more than once and from several goroutines: the
// first call shuts down, the others wait for it and return its result.
func (s *Server) Shutdown(ctx context.Context) error {
	s.shutdownOnce.Do(func() { s.shutdownErr = s.shutdown(ctx) })
	return s.shutdownErr
}

func (s *Server) shutdown(ctx context.Context) error {
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
		s.conns.closeAll()
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
	for _, name := range []string{"", rpcpb.StationService_ServiceDesc.ServiceName, rpcpb.InstructorService_ServiceDesc.ServiceName, rpcpb.StaffService_ServiceDesc.ServiceName} {
		s.health.SetServingStatus(name, st)
	}
}

// ShownKey is the administrator's key New made because none was stored or given;
// empty otherwise. Show it once: only its hash is kept.
func (s *Server) ShownKey() string { return s.shown }

// StationToken returns the token JoinBench would give a bench; for tools
// that act for a station, such as the demo.
func (s *Server) StationToken(sessionID, benchID uint64) string {
	return s.auth.stationToken(sessionID, benchID)
}

// connSet is a listener that remembers its open connections, so Shutdown
// can close the ones cmux is still matching once the servers behind it
// have stopped.
type connSet struct {
	net.Listener
	mu   sync.Mutex
	open map[net.Conn]struct{}
}

func (cs *connSet) Accept() (net.Conn, error) {
	c, err := cs.Listener.Accept()
	if err != nil {
		return nil, err
	}
	cs.mu.Lock()
	defer cs.mu.Unlock()
	if cs.open == nil { // closed: Shutdown has run
		c.Close()
		return nil, net.ErrClosed
	}
	tc := &trackedConn{Conn: c, set: cs}
	cs.open[tc] = struct{}{}
	return tc, nil
}

// closeAll closes every connection still open and every one accepted
// after it.
func (cs *connSet) closeAll() {
	cs.mu.Lock()
	open := cs.open
	cs.open = nil
	cs.mu.Unlock()
	for c := range open {
		c.(*trackedConn).Conn.Close()
	}
}

// trackedConn leaves its set when it is closed.
type trackedConn struct {
	net.Conn
	set  *connSet
	once sync.Once
}

func (c *trackedConn) Close() error {
	c.once.Do(func() {
		c.set.mu.Lock()
		delete(c.set.open, c)
		c.set.mu.Unlock()
	})
	return c.Conn.Close()
}
