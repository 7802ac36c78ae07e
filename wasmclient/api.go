package wasmclient

import (
	"context"
	"fmt"
	"strings"

	"google.golang.org/protobuf/proto"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// Procedure paths of the RPCs the dashboard calls. They must match the
// service definitions in proto/fluxroom/v1/service.proto;
// cmd/fluxroom/api_test.go checks them against the generated grpc-go names.
const (
	ProcWatchRoom        = "/fluxroom.v1.InstructorService/WatchRoom"
	ProcListSessions     = "/fluxroom.v1.InstructorService/ListSessions"
	ProcGetBenchDetail   = "/fluxroom.v1.InstructorService/GetBenchDetail"
	ProcCreateSession    = "/fluxroom.v1.InstructorService/CreateSession"
	ProcUpdateSession    = "/fluxroom.v1.InstructorService/UpdateSession"
	ProcSetBenches       = "/fluxroom.v1.InstructorService/SetBenches"
	ProcAddNote          = "/fluxroom.v1.InstructorService/AddNote"
	ProcAcknowledgeAlert = "/fluxroom.v1.InstructorService/AcknowledgeAlert"
	ProcSetGroupMembers  = "/fluxroom.v1.InstructorService/SetGroupMembers"
	ProcSetGradingPolicy = "/fluxroom.v1.InstructorService/SetGradingPolicy"
	ProcOverrideGrade    = "/fluxroom.v1.InstructorService/OverrideGrade"
	ProcExport           = "/fluxroom.v1.InstructorService/Export"
	ProcAddStaff         = "/fluxroom.v1.StaffService/AddStaff"
	ProcListStaff        = "/fluxroom.v1.StaffService/ListStaff"
	ProcRevokeStaff      = "/fluxroom.v1.StaffService/RevokeStaff"
	ProcRotateStaffKey   = "/fluxroom.v1.StaffService/RotateStaffKey"
	ProcWhoAmI           = "/fluxroom.v1.StaffService/WhoAmI"
	ProcJoinBench        = "/fluxroom.v1.StationService/JoinBench"
	ProcSubmitReading    = "/fluxroom.v1.StationService/SubmitReading"
	ProcGetBenchState    = "/fluxroom.v1.StationService/GetBenchState"
	ProcListExperiments  = "/fluxroom.v1.StationService/ListExperiments"
)

// gRPC status codes the dashboard tells apart [pub: gRPC status codes,
// doc/statuscodes.md of the gRPC project].
const (
	codeUnknown         = 2
	codeInvalidArgument = 3
	codeNotFound        = 5
	codeDataLoss        = 15
	codeUnavailable     = 14
	codeUnauthenticated = 16
	codePermission      = 7
	codeExhausted       = 8
)

// api is the dashboard's gRPC-Web client to the server that served the
// page. It speaks the binary gRPC-Web protocol over the browser's fetch
// (api_js.go) instead of linking an HTTP client library: that keeps
// app.wasm about a third smaller.
type api struct {
	base string
	// token is a staff key, the administrator's key or the station token,
	// sent as
	// "authorization: Bearer <token>".
	token string
}

func newAPI(base string) *api { return &api{base: base} }

// withToken returns a client that sends the given credential.
func (c *api) withToken(tok string) *api { return &api{base: c.base, token: tok} }

// rpcError is a failed call: its gRPC status code, message and, for
// InvalidArgument, the field violations.
type rpcError struct {
	code   int
	msg    string
	fields map[string]string
}

func (e *rpcError) Error() string { return fmt.Sprintf("%s: %s", codeName(e.code), e.msg) }

func codeName(c int) string {
	switch c {
	case 0:
		return "ok"
	case codeInvalidArgument:
		return "invalid argument"
	case codeNotFound:
		return "not found"
	case codeUnavailable:
		return "unavailable"
	case codeDataLoss:
		return "data loss"
	case codeUnauthenticated:
		return "needs a staff key"
	case codePermission:
		return "not allowed"
	case codeExhausted:
		return "too many requests"
	}
	return fmt.Sprintf("code %d", c)
}

// codeOf returns an error's gRPC code; network failures are Unavailable.
func codeOf(err error) int {
	if e, ok := err.(*rpcError); ok {
		return e.code
	}
	if err == nil {
		return 0
	}
	return codeUnavailable
}

// fieldMessages returns the server's field violations of an InvalidArgument
// error by field path.
func fieldMessages(err error) map[string]string {
	if e, ok := err.(*rpcError); ok && e.fields != nil {
		return e.fields
	}
	return map[string]string{}
}

// unary calls one unary RPC.
func unary[T any, PT interface {
	*T
	proto.Message
}](ctx context.Context, c *api, proc string, req proto.Message) (*T, error) {
	var out *T
	err := c.call(ctx, proc, req, func(b []byte) error {
		m := PT(new(T))
		if err := proto.Unmarshal(b, m); err != nil {
			return err
		}
		out = (*T)(m)
		return nil
	})
	if err == nil && out == nil {
		return nil, &rpcError{code: codeUnknown, msg: "no reply message"}
	}
	return out, err
}

// watchRoom follows the room stream, calling fn for every event, until the
// stream ends or ctx does.
func (c *api) watchRoom(ctx context.Context, sessionID uint64, fn func(*pb.WatchRoomResponse) error) error {
	return c.call(ctx, ProcWatchRoom, &pb.WatchRoomRequest{SessionId: sessionID}, func(b []byte) error {
		var ev pb.WatchRoomResponse
		if err := proto.Unmarshal(b, &ev); err != nil {
			return err
		}
		return fn(&ev)
	})
}

// valueName extracts the value name from a field path such as
// values["force"].unit.
func valueName(field string) string {
	_, rest, ok := strings.Cut(field, `["`)
	if !ok {
		return field
	}
	name, _, _ := strings.Cut(rest, `"]`)
	return name
}
