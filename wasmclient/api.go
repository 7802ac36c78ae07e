package wasmclient

import (
	"context"
	"errors"
	"net/http"
	"strings"

	"connectrpc.com/connect"
	"google.golang.org/genproto/googleapis/rpc/errdetails"

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
	ProcJoinBench        = "/fluxroom.v1.StationService/JoinBench"
	ProcSubmitReading    = "/fluxroom.v1.StationService/SubmitReading"
	ProcGetBenchState    = "/fluxroom.v1.StationService/GetBenchState"
	ProcListExperiments  = "/fluxroom.v1.StationService/ListExperiments"
)

// api is the dashboard's gRPC-Web client to the server that served the page.
type api struct {
	base      string
	watchRoom *connect.Client[pb.WatchRoomRequest, pb.WatchRoomResponse]
}

func newAPI(base string) *api {
	return &api{
		base:      base,
		watchRoom: connect.NewClient[pb.WatchRoomRequest, pb.WatchRoomResponse](http.DefaultClient, base+ProcWatchRoom, connect.WithGRPCWeb()),
	}
}

// unary calls one unary RPC over gRPC-Web.
func unary[Req, Res any](ctx context.Context, c *api, proc string, req *Req) (*Res, error) {
	cl := connect.NewClient[Req, Res](http.DefaultClient, c.base+proc, connect.WithGRPCWeb())
	res, err := cl.CallUnary(ctx, connect.NewRequest(req))
	if err != nil {
		return nil, err
	}
	return res.Msg, nil
}

// fieldMessages returns the server's field violations of an InvalidArgument
// error by field path, plus "" for the error's own message.
func fieldMessages(err error) map[string]string {
	out := map[string]string{}
	var ce *connect.Error
	if !errors.As(err, &ce) {
		return out
	}
	for _, d := range ce.Details() {
		v, derr := d.Value()
		if derr != nil {
			continue
		}
		if br, ok := v.(*errdetails.BadRequest); ok {
			for _, fv := range br.GetFieldViolations() {
				out[fv.GetField()] = fv.GetDescription()
			}
		}
	}
	return out
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
