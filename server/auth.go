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

	"example.com/fluxroom/store"
)

// Roles. Every RPC is authorized here, in one place, before it runs:
//   - public: JoinBench, ListExperiments, health and reflection;
//   - station: SubmitReading and GetBenchState, with a station token for
//     the request's own session and bench (or the instructor key);
//   - instructor: every InstructorService call, with the instructor key.
//
// Both credentials travel as "authorization: Bearer <value>".

// auth holds the credentials the server checks.
type auth struct {
	keyHash []byte // SHA-256 of the instructor key
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
// instructor key; with none stored and none given, a new key is made and
// returned so that the caller can show it once.
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
			if err := db.SetInstructorKeyHash(hashKey(key)); err != nil {
				return nil, "", err
			}
		}
		hash = hashKey(key)
	case len(hash) == 0:
		shown = newKey()
		hash = hashKey(shown)
		if err := db.SetInstructorKeyHash(hash); err != nil {
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

func (a *auth) isInstructor(tok string) bool {
	return tok != "" && subtle.ConstantTimeCompare(hashKey(tok), a.keyHash) == 1
}

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
	md, _ := metadata.FromIncomingContext(ctx)
	for _, v := range md.Get("authorization") {
		if t, ok := strings.CutPrefix(v, "Bearer "); ok {
			return strings.TrimSpace(t)
		}
	}
	return ""
}

const (
	stationSvc    = "/fluxroom.v1.StationService/"
	instructorSvc = "/fluxroom.v1.InstructorService/"
)

// benchRequest is a station request naming its session and bench.
type benchRequest interface {
	GetSessionId() uint64
	GetBenchId() uint64
}

// authorize decides whether the caller may make this call.
func (s *Server) authorize(ctx context.Context, method string, req any) error {
	tok := bearerOf(ctx)
	switch {
	case method == stationSvc+"JoinBench" || method == stationSvc+"ListExperiments":
		return nil
	case strings.HasPrefix(method, "/grpc.health.") || strings.HasPrefix(method, "/grpc.reflection."):
		return nil
	case strings.HasPrefix(method, instructorSvc):
		if !s.auth.isInstructor(tok) {
			return status.Error(codes.Unauthenticated, "this call needs the instructor key (authorization: Bearer <key>)")
		}
		return nil
	case strings.HasPrefix(method, stationSvc):
		if tok == "" {
			return status.Error(codes.Unauthenticated, "this call needs the station token from JoinBench (authorization: Bearer <token>)")
		}
		// The station token first: a station's call then costs no hash of
		// the instructor key, which cannot pass for a signed token.
		sid, bid, ok := s.auth.parseStationToken(tok)
		if !ok {
			if s.auth.isInstructor(tok) {
				return nil
			}
			return status.Error(codes.Unauthenticated, "the station token is not valid; join the bench again")
		}
		br, ok := req.(benchRequest)
		if !ok || br.GetSessionId() != sid || br.GetBenchId() != bid {
			return status.Error(codes.PermissionDenied, "a station may only use its own bench")
		}
		closed, err := s.sessionClosed(sid)
		if err != nil {
			if errors.Is(err, store.ErrNotFound) {
				return status.Error(codes.PermissionDenied, "the session of this token is gone")
			}
			return err
		}
		if closed {
			return status.Error(codes.PermissionDenied, "the session is closed")
		}
		if method == stationSvc+"SubmitReading" && !s.auth.admit(ctx, sid, bid) {
			s.metrics.rateLimited.Add(1)
			return status.Error(codes.ResourceExhausted, "too many readings from this bench; wait a moment and send again")
		}
		return nil
	}
	return status.Error(codes.PermissionDenied, "unknown method")
}

func (s *Server) unaryAuth(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
	if err := s.authorize(ctx, info.FullMethod, req); err != nil {
		return nil, err
	}
	return handler(ctx, req)
}

func (s *Server) streamAuth(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
	if err := s.authorize(ss.Context(), info.FullMethod, nil); err != nil {
		return err
	}
	return handler(srv, ss)
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
