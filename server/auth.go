package server

import (
	"context"
	"crypto/hmac"
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"encoding/binary"
	"errors"
	"strings"
	"sync"
	"time"

	"golang.org/x/time/rate"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/store"
)

// Who may call what. Every RPC is authorized here, in one place, before it
// runs:
//   - public: JoinBench, ListExperiments, health and reflection;
//   - station: SubmitReading and GetBenchState, with a station token for
//     the request's own session and bench;
//   - staff: every InstructorService and StaffService call, with a staff
//     key or the administrator's key. A call that names a session is
//     allowed by the caller's role in that session's course (staffRules,
//     domain.Role.May); the calls that name none (CreateSession,
//     ListSessions, WatchRoom's stream, Backup, StaffService) check or
//     filter by course in their handlers, with the caller authorize puts
//     in the context. A staff key may also make a station's calls, as its
//     role in the course allows.
//
// Every credential travels as "authorization: Bearer <value>".

// auth holds the credentials the server checks.
type auth struct {
	keyHash []byte // SHA-256 of the administrator's key
	secret  []byte // HMAC key of station tokens

	mu       sync.Mutex
	limiters map[[2]uint64]*rate.Limiter
	rate     rate.Limit
	burst    int
	hold     time.Duration
	// verified: station token → [2]uint64{session, bench}, for tokens whose
	// signature checked out.
	verified sync.Map
}

// newKey returns a random credential, URL-safe.
func newKey() string {
	b := make([]byte, 24)
	rand.Read(b)
	return base64.RawURLEncoding.EncodeToString(b)
}

func hashKey(k string) []byte {
	h := sha256.Sum256([]byte(k))
	return h[:]
}

// setUpAuth loads or creates the credentials. With key set it becomes the
// administrator's key; with none stored and none given, a new key is made
// and returned so that the caller can show it once.
func setUpAuth(db *store.DB, key string) (*auth, string, error) {
	hash, secret, err := db.Credentials(func() []byte {
		b := make([]byte, 32)
		rand.Read(b)
		return b
	})
	if err != nil {
		return nil, "", err
	}
	var shown string
	switch {
	case key != "":
		if !hmac.Equal(hash, hashKey(key)) {
			if err := db.SetAdminKeyHash(hashKey(key)); err != nil {
				return nil, "", err
			}
		}
		hash = hashKey(key)
	case len(hash) == 0:
		shown = newKey()
		hash = hashKey(shown)
		if err := db.SetAdminKeyHash(hash); err != nil {
			return nil, "", err
		}
	}
	return &auth{keyHash: hash, secret: secret, limiters: map[[2]uint64]*rate.Limiter{}}, shown, nil
}

// stationToken binds a token to one session and bench: the ids, and an
// HMAC-SHA256 over them, truncated to 128 bits.
func (a *auth) stationToken(sessionID, benchID uint64) string {
	payload := make([]byte, 16)
	binary.BigEndian.PutUint64(payload[0:8], sessionID)
	binary.BigEndian.PutUint64(payload[8:16], benchID)
	m := hmac.New(sha256.New, a.secret)
	m.Write(payload)
	return base64.RawURLEncoding.EncodeToString(payload) + "." + base64.RawURLEncoding.EncodeToString(m.Sum(nil)[:16])
}

// parseStationToken returns the session and bench a valid token is for.
func (a *auth) parseStationToken(tok string) (sessionID, benchID uint64, ok bool) {
	// A token is checked once: a station sends the same one with every
	// reading, and an unforgeable token stays valid (closing its session is
	// checked apart). One entry per bench ever joined.
	if v, hit := a.verified.Load(tok); hit {
		ids := v.([2]uint64)
		return ids[0], ids[1], true
	}
	sessionID, benchID, ok = a.verifyStationToken(tok)
	if ok {
		a.verified.Store(tok, [2]uint64{sessionID, benchID})
	}
	return sessionID, benchID, ok
}

func (a *auth) verifyStationToken(tok string) (sessionID, benchID uint64, ok bool) {
	p, sig, found := strings.Cut(tok, ".")
	if !found {
		return 0, 0, false
	}
	payload, err1 := base64.RawURLEncoding.DecodeString(p)
	mac, err2 := base64.RawURLEncoding.DecodeString(sig)
	if err1 != nil || err2 != nil || len(payload) != 16 {
		return 0, 0, false
	}
	m := hmac.New(sha256.New, a.secret)
	m.Write(payload)
	if !hmac.Equal(mac, m.Sum(nil)[:16]) {
		return 0, 0, false
	}
	return binary.BigEndian.Uint64(payload[0:8]), binary.BigEndian.Uint64(payload[8:16]), true
}

func (a *auth) isAdmin(tok string) bool { return tok != "" && a.isAdminHash(hashKey(tok)) }

// isAdminHash compares a key's hash with the administrator's, in constant
// time.
func (a *auth) isAdminHash(h []byte) bool { return subtle.ConstantTimeCompare(h, a.keyHash) == 1 }

// admit takes one reading from a station's budget. A reading over the
// bench's rate waits for the bench's next turn, up to hold, so a laptop that
// sends too fast is slowed rather than refused; past that it is refused
// after the same wait, so a flooding client cannot get its refusals, which
// cost the server too, any faster than one per hold per call in flight.
func (a *auth) admit(ctx context.Context, sessionID, benchID uint64) bool {
	a.mu.Lock()
	l, ok := a.limiters[[2]uint64{sessionID, benchID}]
	if !ok {
		l = rate.NewLimiter(a.rate, a.burst)
		a.limiters[[2]uint64{sessionID, benchID}] = l
	}
	a.mu.Unlock()
	r := l.Reserve()
	d := r.Delay()
	if d == 0 {
		return true
	}
	admitted := r.OK() && d <= a.hold
	if !admitted {
		r.Cancel()
		d = a.hold
	}
	t := time.NewTimer(d)
	defer t.Stop()
	select {
	case <-t.C:
		return admitted
	case <-ctx.Done():
		if admitted { // a refused reservation is cancelled already
			r.Cancel()
		}
		return false
	}
}

func bearerOf(ctx context.Context) string {
	// ValueFromIncomingContext reads the one key; FromIncomingContext would
	// copy every header of the call, at every reading.
	for _, v := range metadata.ValueFromIncomingContext(ctx, "authorization") {
		if t, ok := strings.CutPrefix(v, "Bearer "); ok {
			return strings.TrimSpace(t)
		}
	}
	return ""
}

const (
	stationSvc    = "/fluxroom.v1.StationService/"
	instructorSvc = "/fluxroom.v1.InstructorService/"
	staffSvc      = "/fluxroom.v1.StaffService/"
)

// benchRequest is a station request naming its session and bench.
type benchRequest interface {
	GetSessionId() uint64
	GetBenchId() uint64
}

// sessionRequest is a request naming its session.
type sessionRequest interface{ GetSessionId() uint64 }

// staffRules is what each staff call that names a session asks of the
// caller's role in the session's course. Calls missing here check in their
// handlers (see the comment at the top of this file).
var staffRules = map[string]domain.Action{
	stationSvc + "SubmitReading":       domain.ActSubmit,
	stationSvc + "GetBenchState":       domain.ActWatch,
	instructorSvc + "SetBenches":       domain.ActSetUp,
	instructorSvc + "GetBenchDetail":   domain.ActWatch,
	instructorSvc + "UpdateSession":    domain.ActSetUp,
	instructorSvc + "CloseSession":     domain.ActClose,
	instructorSvc + "AddNote":          domain.ActNote,
	instructorSvc + "AcknowledgeAlert": domain.ActNote,
	instructorSvc + "SetGradingPolicy": domain.ActPolicy,
	instructorSvc + "OverrideGrade":    domain.ActOverride,
	instructorSvc + "Export":           domain.ActExport,
	instructorSvc + "SetGroupMembers":  domain.ActMembers,
}

// keyCaller finds whose key tok is: the administrator's, or a staff
// account's (revoked ones too, so the refusal can say so).
func (s *Server) keyCaller(tok string) (caller, bool) {
	if tok == "" {
		return caller{}, false
	}
	h := sha256.Sum256([]byte(tok))
	if s.auth.isAdminHash(h[:]) {
		return caller{admin: true}, true
	}
	st, ok := s.staff.lookup(h)
	return caller{staff: st}, ok
}

// authorize decides whether the caller may make this call. A staff call
// gets its caller in the returned context.
func (s *Server) authorize(ctx context.Context, method string, req any) (context.Context, error) {
	tok := bearerOf(ctx)
	switch {
	case method == stationSvc+"JoinBench" || method == stationSvc+"ListExperiments":
		return ctx, nil
	case strings.HasPrefix(method, "/grpc.health.") || strings.HasPrefix(method, "/grpc.reflection."):
		return ctx, nil
	case strings.HasPrefix(method, instructorSvc) || strings.HasPrefix(method, staffSvc):
		c, known := s.keyCaller(tok)
		return s.authorizeStaff(ctx, c, known, method, req)
	case strings.HasPrefix(method, stationSvc):
		if tok == "" {
			return ctx, status.Error(codes.Unauthenticated, "this call needs the station token from JoinBench (authorization: Bearer <token>)")
		}
		// The station token first: a station's call then costs no hash of
		// a key, which cannot pass for a signed token.
		sid, bid, ok := s.auth.parseStationToken(tok)
		if !ok {
			if c, known := s.keyCaller(tok); known {
				return s.authorizeStaff(ctx, c, known, method, req)
			}
			return ctx, status.Error(codes.Unauthenticated, "the station token is not valid; join the bench again")
		}
		br, ok := req.(benchRequest)
		if !ok || br.GetSessionId() != sid || br.GetBenchId() != bid {
			return ctx, status.Error(codes.PermissionDenied, "a station may only use its own bench")
		}
		closed, err := s.sessionClosed(sid)
		if err != nil {
			if errors.Is(err, store.ErrNotFound) {
				return ctx, status.Error(codes.PermissionDenied, "the session of this token is gone")
			}
			return ctx, err
		}
		if closed {
			return ctx, status.Error(codes.PermissionDenied, "the session is closed")
		}
		if method == stationSvc+"SubmitReading" && !s.auth.admit(ctx, sid, bid) {
			s.metrics.rateLimited.Add(1)
			return ctx, status.Error(codes.ResourceExhausted, "too many readings from this bench; wait a moment and send again")
		}
		return ctx, nil
	}
	return ctx, status.Error(codes.PermissionDenied, "unknown method")
}

// authorizeStaff checks a staff call by the caller keyCaller found (known
// says it found one): a key that is not revoked, and for a call that names
// a session, the caller's role in its course.
func (s *Server) authorizeStaff(ctx context.Context, c caller, known bool, method string, req any) (context.Context, error) {
	if !known {
		return ctx, status.Error(codes.Unauthenticated, "this call needs a staff key or the administrator's key (authorization: Bearer <key>)")
	}
	if !c.admin && c.staff.Revoked {
		return ctx, status.Errorf(codes.Unauthenticated, "the key of %s has been revoked; ask your course's instructor or the administrator for a new one", c.staff.Name)
	}
	if act, ok := staffRules[method]; ok && !c.admin {
		sr, ok := req.(sessionRequest)
		if !ok {
			return ctx, status.Error(codes.PermissionDenied, "this call names no session to check the caller's course against")
		}
		if err := s.mayInSession(c, act, sr.GetSessionId()); err != nil {
			return ctx, err
		}
	}
	return context.WithValue(ctx, callerKey{}, c), nil
}

// mayInSession checks the caller's role in a session's course. A session
// that does not exist is left to the handler, which says so by field.
func (s *Server) mayInSession(c caller, act domain.Action, sessionID uint64) error {
	if c.admin {
		return nil
	}
	course, err := s.courseOf(sessionID)
	if errors.Is(err, store.ErrNotFound) {
		return nil
	}
	if err != nil {
		return err
	}
	return c.allows(act, course)
}

// courseOf returns a session's course. A session's course never changes,
// so the answer is remembered.
func (s *Server) courseOf(sessionID uint64) (string, error) {
	if v, ok := s.courses.Load(sessionID); ok {
		return v.(string), nil
	}
	sess, err := s.db.Session(sessionID)
	if err != nil {
		return "", err
	}
	s.courses.Store(sessionID, sess.Course)
	return sess.Course, nil
}

func (s *Server) unaryAuth(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	ctx, err := s.authorize(ctx, info.FullMethod, req)
	if err != nil {
		return nil, err
	}
	return handler(ctx, req)
}

// streamAuth authorizes a stream; a staff account's stream ends at once
// when its key is revoked or replaced.
func (s *Server) streamAuth(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	ctx, err := s.authorize(ss.Context(), info.FullMethod, nil)
	if err != nil {
		return err
	}
	if c, ok := callerOf(ctx); ok && !c.admin {
		var stop func()
		ctx, stop = s.staff.watch(ctx, c.staff.ID)
		defer stop()
	}
	return handler(srv, ctxStream{ServerStream: ss, ctx: ctx})
}

// ctxStream is a stream with the context authorize made.
type ctxStream struct {
	grpc.ServerStream
	ctx context.Context
}

func (c ctxStream) Context() context.Context { return c.ctx }

// streamEnded is why a stream's context ended: a revoked key's reason, or
// the context's own error.
func streamEnded(ctx context.Context) error {
	if c := context.Cause(ctx); c != nil && status.Code(c) != codes.Unknown {
		return c
	}
	return ctx.Err()
}

// stationRateDefault lets a bench send 5 readings a second with bursts of
// 20: far above a group typing by hand, enough for a data logger's file,
// and a bound on one laptop flooding the server // common practice.
const (
	stationRateDefault  = 5
	stationBurstDefault = 20
	stationHoldDefault  = 250 * time.Millisecond
)

// sessionClosed says whether a session is closed. Sessions never reopen, so
// the answer is remembered: a station's every call then costs no read of
// the file.
func (s *Server) sessionClosed(id uint64) (bool, error) {
	if v, ok := s.closed.Load(id); ok {
		return v.(bool), nil
	}
	sess, err := s.db.Session(id)
	if err != nil {
		return false, err
	}
	s.closed.Store(id, sess.Closed)
	return sess.Closed, nil
}
