package main

import (
	"testing"

	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/wasmclient"
)

// The dashboard names its RPCs by path so that it need not import the grpc-go
// stubs; these must stay equal to the generated names.
func TestDashboardProcedurePaths(t *testing.T) {
	for _, tc := range []struct{ got, want string }{
		{wasmclient.ProcWatchRoom, rpcpb.InstructorService_WatchRoom_FullMethodName},
		{wasmclient.ProcListSessions, rpcpb.InstructorService_ListSessions_FullMethodName},
		{wasmclient.ProcGetBenchDetail, rpcpb.InstructorService_GetBenchDetail_FullMethodName},
		{wasmclient.ProcSetGroupMembers, rpcpb.InstructorService_SetGroupMembers_FullMethodName},
		{wasmclient.ProcCreateSession, rpcpb.InstructorService_CreateSession_FullMethodName},
		{wasmclient.ProcOverrideGrade, rpcpb.InstructorService_OverrideGrade_FullMethodName},
		{wasmclient.ProcAddStaff, rpcpb.StaffService_AddStaff_FullMethodName},
		{wasmclient.ProcListStaff, rpcpb.StaffService_ListStaff_FullMethodName},
		{wasmclient.ProcRevokeStaff, rpcpb.StaffService_RevokeStaff_FullMethodName},
		{wasmclient.ProcRotateStaffKey, rpcpb.StaffService_RotateStaffKey_FullMethodName},
		{wasmclient.ProcWhoAmI, rpcpb.StaffService_WhoAmI_FullMethodName},
	} {
		if tc.got != tc.want {
			t.Errorf("dashboard calls %q, the service defines %q", tc.got, tc.want)
		}
	}
}
