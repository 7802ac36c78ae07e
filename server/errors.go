package server

import (
	"context"
	"errors"
	"log/slog"
	"strings"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/store"
)

// toStatus is the one place where errors become gRPC statuses. Bad input
// becomes InvalidArgument with a field violation per bad field; everything
// unexpected becomes Internal with a generic message, the detail logged and
// never sent (a client never sees a bbolt error).
func toStatus(ctx context.Context, log *slog.Logger, method string, err error) error {
	if err == nil {
		return nil
	}
	if _, ok := status.FromError(err); ok {
		return err
	}
	var ve *domain.ValidationError
	switch {
	case errors.As(err, &ve):
		br := &errdetails.BadRequest{}
		msgs := make([]string, len(ve.Violations))
		for i, v := range ve.Violations {
			br.FieldViolations = append(br.FieldViolations, &errdetails.BadRequest_FieldViolation{Field: v.Field, Description: v.Reason})
			msgs[i] = v.Field + ": " + v.Reason
		}
		st, derr := status.New(codes.InvalidArgument, "invalid request: "+strings.Join(msgs, "; ")).WithDetails(br)
		if derr != nil {
			return status.Error(codes.InvalidArgument, "invalid request: "+strings.Join(msgs, "; "))
		}
		return st.Err()
	case errors.Is(err, store.ErrNotFound):
		return status.Error(codes.NotFound, "not found")
	case errors.Is(err, store.ErrConflict):
		return status.Error(codes.AlreadyExists, "already exists")
	case errors.Is(err, context.Canceled):
		return status.Error(codes.Canceled, "canceled")
	case errors.Is(err, context.DeadlineExceeded):
		return status.Error(codes.DeadlineExceeded, "deadline exceeded")
	}
	log.ErrorContext(ctx, "request failed", "method", method, "err", err)
	return status.Error(codes.Internal, "internal error; the server log has the detail")
}
