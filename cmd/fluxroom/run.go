package main

import (
	"context"
	"crypto/tls"
	"embed"
	"errors"
	"flag"
	"fmt"
	"io"
	"io/fs"
	"log/slog"
	"math"
	"net"
	"os"
	"path/filepath"
	"runtime/debug"
	"strconv"
	"strings"

	"time"

	"example.com/fluxroom/internal/cpuprofile"
	"example.com/fluxroom/server"
	"example.com/fluxroom/store"
	"example.com/fluxroom/wasmclient"
)

//go:embed web
var embedded embed.FS

// warnPlaintext warns when the server listens beyond loopback without TLS:
// station tokens and the instructor key then cross the room's network in
// clear text.
func warnPlaintext(log *slog.Logger, addr net.Addr) {
	if ta, ok := addr.(*net.TCPAddr); ok && !ta.IP.IsLoopback() {
		log.Warn("serving without TLS on a non-loopback address: credentials cross the network in clear; see README, Classroom network", "addr", addr.String())
	}
}

// usageError is a mistake in the command line; main exits 2 for it.
type usageError struct{ msg string }

func (e usageError) Error() string { return e.msg }

// Main is the program: main() only wires signals and exit codes to it, and
// tests run it for real on :0 with a temp-dir database.
type Main struct {
	Stdout, Stderr io.Writer
	// Web holds the built dashboard (app.wasm and friends). Default: the
	// files embedded at build time.
	Web fs.FS
	// Ready, when set, receives the listening address once serving.
	Ready chan<- net.Addr
}

// NewMain returns a Main writing to the given streams.
func NewMain(stdout, stderr io.Writer) *Main {
	web, _ := fs.Sub(embedded, "web")
	return &Main{Stdout: stdout, Stderr: stderr, Web: web}
}

const helpText = `fluxroom: live oversight for magnetism teaching labs.

Commands:
  serve   run the server: native gRPC for stations, the dashboard for instructors
  demo    run the server with a simulated class of benches, and print the room
  analyze judge a readings CSV with the same engine: fluxroom analyze [--json] FILE.csv
  submit  send a readings CSV to a live session: fluxroom submit --server HOST:PORT --code CODE --bench LABEL FILE.csv
  export  write a session's gradebook, readings, JSON or report: fluxroom export --db FILE --session N --format csv|readings|json|html --out FILE
  catalogue list every diagnosis code with its cause and suggested action
  backup  copy the database while serving: fluxroom backup --server HOST:PORT --key KEY --out FILE (or --db FILE)
  staff   staff accounts: fluxroom staff add|list|revoke|rotate|whoami --server HOST:PORT --key KEY ...
  restore put a checked backup in place (server stopped): fluxroom restore --from FILE --db FILE
  version print the version
  help    show this text

Run "fluxroom COMMAND -h" for a command's flags. Every flag can also be set
by an environment variable: FLUXROOM_ and the flag name in capitals with _
for -, for example FLUXROOM_ADDR.
`

// Run runs one command.
func (m *Main) Run(ctx context.Context, args []string) error {
	if len(args) == 0 {
		fmt.Fprint(m.Stderr, helpText)
		return usageError{"no command given"}
	}
	switch args[0] {
	case "serve":
		return m.serve(ctx, args[1:])
	case "demo":
		return m.demo(ctx, args[1:])
	case "analyze":
		return m.analyzeCmd(ctx, args[1:])
	case "submit":
		return m.submitCmd(ctx, args[1:])
	case "catalogue":
		return m.catalogueCmd(ctx, args[1:])
	case "export":
		return m.exportCmd(ctx, args[1:])
	case "backup":
		return m.backupCmd(ctx, args[1:])
	case "restore":
		return m.restoreCmd(ctx, args[1:])
	case "staff":
		return m.staffCmd(ctx, args[1:])
	case "version":
		return m.versionCmd(ctx, args[1:])
	case "help", "-h", "--help":
		fmt.Fprint(m.Stdout, helpText)
		return nil
	}
	fmt.Fprint(m.Stderr, helpText)
	return usageError{fmt.Sprintf("unknown command %q", args[0])}
}

// newFlags returns a flag set whose flags default to FLUXROOM_* variables.
func (m *Main) newFlags(name string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(m.Stderr)
	return fs
}

// parse parses args after applying FLUXROOM_* environment defaults and
// allows no positional arguments.
func parse(fs *flag.FlagSet, args []string) error {
	if err := parseArgs(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError{fmt.Sprintf("%s: unexpected argument %q", fs.Name(), fs.Arg(0))}
	}
	return nil
}

// parseArgs parses args after applying FLUXROOM_* environment defaults.
// Flags may come before or after the positional arguments
// ("analyze FILE --json" as well as "analyze --json FILE"); a lone "--"
// ends the flags. A request for help is flag.ErrHelp, which main answers
// with exit status 0.
func parseArgs(fs *flag.FlagSet, args []string) error {
	var envErr error
	fs.VisitAll(func(f *flag.Flag) {
		key := "FLUXROOM_" + strings.ToUpper(strings.ReplaceAll(f.Name, "-", "_"))
		if v, ok := os.LookupEnv(key); ok {
			if err := f.Value.Set(v); err != nil && envErr == nil {
				envErr = usageError{fmt.Sprintf("%s=%q: %v", key, v, err)}
			}
		}
	})
	if envErr != nil {
		return envErr
	}
	var positional []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return err
			}
			return usageError{err.Error()}
		}
		rest := fs.Args()
		if len(rest) == 0 {
			break
		}
		if len(args) > 0 && len(rest) < len(args) && args[len(args)-len(rest)-1] == "--" {
			positional = append(positional, rest...) // after "--", all positional
			break
		}
		positional, args = append(positional, rest[0]), rest[1:]
	}
	// Leave the positional arguments where fs.Args finds them.
	return fs.Parse(append([]string{"--"}, positional...))
}

// running is a started server with its database.
type running struct {
	db *store.DB
	// key is the instructor key when start made a new one.
	key  string
	tls  bool
	srv  *server.Server
	addr net.Addr
	done chan error
	log  *slog.Logger
}

// serverOptions are what start needs beyond the database and address.
type serverOptions struct {
	adminKey        string
	tlsCert, tlsKey string
	// prepare, when set, is called on the server before it serves: a
	// failpoints build installs its test hooks there (testFlags).
	prepare      func(*server.Server)
	stationRate  float64
	stationBurst int
	roomIdle     time.Duration
	watchEvery   time.Duration
}

// start opens the database and serves on addr until ctx ends or stop runs.
func (m *Main) start(dbPath, addr string, log *slog.Logger, opts serverOptions) (*running, error) {
	if err := os.MkdirAll(filepath.Dir(dbPath), 0o750); err != nil {
		return nil, fmt.Errorf("create data directory: %w", err)
	}
	db, err := store.Open(dbPath, store.Options{})
	if err != nil {
		return nil, err
	}
	web, err := wasmclient.Handler(m.Web)
	if err != nil {
		db.Close()
		return nil, fmt.Errorf("dashboard: %w", err)
	}
	srv, err := server.New(server.Config{DB: db, Logger: log, Web: web, AdminKey: opts.adminKey,
		StationRate: opts.stationRate, StationBurst: opts.stationBurst, RoomIdle: opts.roomIdle,
		WatchEvery: opts.watchEvery})
	if err != nil {
		db.Close()
		return nil, err
	}
	if opts.prepare != nil {
		opts.prepare(srv)
	}
	l, err := net.Listen("tcp", addr)
	if err != nil {
		db.Close()
		return nil, fmt.Errorf("listen on %s: %w", addr, err)
	}
	if opts.tlsCert != "" || opts.tlsKey != "" {
		cert, err := tls.LoadX509KeyPair(opts.tlsCert, opts.tlsKey)
		if err != nil {
			l.Close()
			db.Close()
			return nil, fmt.Errorf("--tls-cert/--tls-key: %w", err)
		}
		// TLS ends here; behind it the one port still splits native gRPC
		// from the browser's HTTP/2 and HTTP/1.1.
		l = tls.NewListener(l, &tls.Config{Certificates: []tls.Certificate{cert}, NextProtos: []string{"h2", "http/1.1"}, MinVersion: tls.VersionTLS12})
	}
	r := &running{db: db, srv: srv, addr: l.Addr(), done: make(chan error, 1), log: log, key: srv.ShownKey(), tls: opts.tlsCert != ""}
	if r.tls {
		go func() { r.done <- srv.ServeAllHTTP(l) }()
	} else {
		go func() { r.done <- srv.Serve(l) }()
	}
	if m.Ready != nil {
		m.Ready <- l.Addr()
	}
	return r, nil
}

// parseBytes reads a size as GOMEMLIMIT writes it: a number with B, KiB,
// MiB, GiB or TiB.
func parseBytes(s string) (int64, error) {
	units := []struct {
		suffix string
		mult   int64
	}{{"TiB", 1 << 40}, {"GiB", 1 << 30}, {"MiB", 1 << 20}, {"KiB", 1 << 10}, {"B", 1}}
	for _, u := range units {
		if num, ok := strings.CutSuffix(strings.TrimSpace(s), u.suffix); ok {
			v, err := strconv.ParseFloat(strings.TrimSpace(num), 64)
			if err != nil || v <= 0 {
				return 0, fmt.Errorf("%q is not a positive size", s)
			}
			return int64(v * float64(u.mult)), nil
		}
	}
	return 0, fmt.Errorf("%q needs a unit: B, KiB, MiB, GiB or TiB", s)
}

// stop shuts the server down and closes the database.
func (r *running) stop() error {
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
	defer cancel()
	err := r.srv.Shutdown(ctx)
	if serr := <-r.done; serr != nil && err == nil {
		err = serr
	}
	if cerr := r.db.Close(); cerr != nil && err == nil {
		err = cerr
	}
	return err
}

func (m *Main) logger(level string) (*slog.Logger, error) {
	var l slog.Level
	if err := l.UnmarshalText([]byte(level)); err != nil {
		return nil, usageError{fmt.Sprintf("--log-level: %v", err)}
	}
	return slog.New(slog.NewTextHandler(m.Stderr, &slog.HandlerOptions{Level: l})), nil
}

// defaultGCPercent and defaultMemoryLimit are Go's own. Measured with the
// load program: 400 with a 280 MiB limit kept 5 000 stations nearer 300 MB
// but, with the live heap close to the limit, the collector ran without
// pause at 5 000 readings/s (server CPU per reading 363–396 µs against
// 201–209 at 512 stations); 400 alone cost 420–540 MB there; in runs of a
// lab's length at 512 stations neither moved the CPU per reading beyond the
// machine's noise.
const (
	defaultGCPercent   = 100
	defaultMemoryLimit = "none"
)

func (m *Main) serve(ctx context.Context, args []string) error {
	fs := m.newFlags("serve")
	dbPath := fs.String("db", "fluxroom-data/fluxroom.db", "bbolt database file (created if missing)")
	addr := fs.String("addr", "127.0.0.1:8080", "host:port to listen on, for gRPC and the dashboard")
	level := fs.String("log-level", "info", "log level: debug, info, warn or error")
	key := fs.String("admin-key", "", "the administrator's key (default: the one stored, or a new one shown once)")
	keyFile := fs.String("admin-key-file", "", "read the administrator's key from this file")
	// Their names before staff accounts, on the same values.
	fs.StringVar(key, "instructor-key", "", "the same as --admin-key")
	fs.StringVar(keyFile, "instructor-key-file", "", "the same as --admin-key-file")
	tlsCert := fs.String("tls-cert", "", "TLS certificate file (PEM); with --tls-key, serves gRPC and the dashboard over TLS")
	tlsKey := fs.String("tls-key", "", "TLS private key file (PEM)")
	stRate := fs.Float64("station-rate", 5, "readings per second each bench may send")
	stBurst := fs.Int("station-burst", 20, "readings a bench may send at once before the rate applies")
	roomIdle := fs.Duration("room-idle", 10*time.Minute, "how long a room nobody watches stays in memory after its last reading")
	watchEvery := fs.Duration("watch-every", 50*time.Millisecond, "the shortest time between two updates of one dashboard tab; changes in between go together (raise it for slow laptops or projectors)")
	memLimit := fs.String("memory-limit", defaultMemoryLimit, "soft limit on the server's memory, such as 400MiB or 2GiB, or none: the collector works harder near it (default none, or GOMEMLIMIT)")
	gcPercent := fs.Int("gc-percent", defaultGCPercent, "the collector's GOGC: heap growth between collections, in percent of the live heap (default 100, or GOGC); higher trades memory for CPU")
	cpuProfile := fs.String("cpuprofile", "", "write a CPU profile of the server to this file until it stops (performance work)")
	testHooks := testFlags(fs)
	if err := parse(fs, args); err != nil {
		return err
	}
	log, err := m.logger(*level)
	if err != nil {
		return err
	}
	if *keyFile != "" {
		b, err := os.ReadFile(*keyFile)
		if err != nil {
			return fmt.Errorf("--admin-key-file: %w", err)
		}
		*key = strings.TrimSpace(string(b))
	}
	if *key != "" && len(*key) < 16 {
		return usageError{"--admin-key must be at least 16 characters"}
	}
	if *gcPercent <= 0 {
		return usageError{"--gc-percent must be positive"}
	}
	if *roomIdle <= 0 {
		return usageError{fmt.Sprintf("--room-idle must be positive, got %v", *roomIdle)}
	}
	if *watchEvery < time.Millisecond || *watchEvery > 10*time.Second {
		return usageError{fmt.Sprintf("--watch-every must be 1ms–10s, got %v", *watchEvery)}
	}
	limit := int64(math.MaxInt64)
	if *memLimit != "none" {
		if limit, err = parseBytes(*memLimit); err != nil {
			return usageError{fmt.Sprintf("--memory-limit: %v (or none)", err)}
		}
	}
	// GOGC and GOMEMLIMIT, when set, win over the defaults, not over flags.
	if _, fromEnv := os.LookupEnv("GOGC"); !fromEnv || *gcPercent != defaultGCPercent {
		debug.SetGCPercent(*gcPercent)
	}
	if _, fromEnv := os.LookupEnv("GOMEMLIMIT"); !fromEnv || *memLimit != defaultMemoryLimit {
		debug.SetMemoryLimit(limit)
	}
	stopProfile, err := cpuprofile.Start(*cpuProfile)
	if err != nil {
		return err
	}
	defer stopProfile()
	r, err := m.start(*dbPath, *addr, log, serverOptions{adminKey: *key, prepare: testHooks(log),
		stationRate: *stRate, stationBurst: *stBurst, tlsCert: *tlsCert, tlsKey: *tlsKey, roomIdle: *roomIdle, watchEvery: *watchEvery})
	if err != nil {
		return err
	}
	scheme := "http"
	if r.tls {
		scheme = "https"
	}
	if r.key != "" {
		fmt.Fprintf(m.Stderr, "\nNew administrator's key (shown once; only its hash is stored):\n\n    %s\n\nOpen the dashboard with it: %s://%s/#key=%s\nGive instructors their own keys: fluxroom staff add --help\n\n", r.key, scheme, r.addr, r.key)
	}
	if !r.tls {
		warnPlaintext(log, r.addr)
	}
	log.Info("serving", "addr", r.addr.String(), "db", *dbPath, "dashboard", "http://"+r.addr.String()+"/", "version", version)
	select {
	case <-ctx.Done():
	case err := <-r.done:
		r.done <- err
	}
	log.Info("shutting down")
	return r.stop()
}
