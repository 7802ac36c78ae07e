package server

import (
	"context"
	"log/slog"
	"net/http"
	"strconv"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
)

// adminOnly lets through HTTP requests that carry the administrator's key
// as a bearer token.
func (s *Server) adminOnly(h http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		tok, _ := strings.CutPrefix(r.Header.Get("Authorization"), "Bearer ")
		if !s.auth.isAdmin(strings.TrimSpace(tok)) {
			http.Error(w, "this needs the administrator's key (Authorization: Bearer <key>)", http.StatusUnauthorized)
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
