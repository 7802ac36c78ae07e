package wasmclient

import (
	"net/http"

	"connectrpc.com/connect"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// Procedure paths of the RPCs the dashboard calls. They must match the
// service definitions in proto/fluxroom/v1/service.proto; a server test
// checks them against the generated grpc-go names.
const (
	ProcWatchRoom      = "/fluxroom.v1.InstructorService/WatchRoom"
	ProcListSessions   = "/fluxroom.v1.InstructorService/ListSessions"
	ProcGetBenchDetail = "/fluxroom.v1.InstructorService/GetBenchDetail"
)

// api is the dashboard's gRPC-Web client to the server that served the page.
type api struct {
	watchRoom    *connect.Client[pb.WatchRoomRequest, pb.WatchRoomResponse]
	listSessions *connect.Client[pb.ListSessionsRequest, pb.ListSessionsResponse]
}

func newAPI(base string) *api {
	hc := http.DefaultClient
	return &api{
		watchRoom:    connect.NewClient[pb.WatchRoomRequest, pb.WatchRoomResponse](hc, base+ProcWatchRoom, connect.WithGRPCWeb()),
		listSessions: connect.NewClient[pb.ListSessionsRequest, pb.ListSessionsResponse](hc, base+ProcListSessions, connect.WithGRPCWeb()),
	}
}
