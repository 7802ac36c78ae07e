package wasmclient

import (
	"testing"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// The dashboard leaves out what a role cannot do; these are the same rules
// the server enforces (server.TestAuthorizationMatrix).
func TestWhoManages(t *testing.T) {
	const instr, asst = pb.StaffRole_STAFF_ROLE_INSTRUCTOR, pb.StaffRole_STAFF_ROLE_ASSISTANT
	rosalind := &who{id: 1, name: "Rosalind Achterberg", roles: []*pb.CourseRole{{Course: "PHY 118", Role: asst}, {Course: "PHY 214", Role: instr}}}
	member := func(id uint64, roles ...*pb.CourseRole) *pb.StaffMember {
		return &pb.StaffMember{StaffId: id, Roles: roles}
	}
	for _, tc := range []struct {
		w         *who
		m         *pb.StaffMember
		self, may bool
	}{
		{rosalind, member(2, &pb.CourseRole{Course: "PHY 214", Role: asst}), false, true},
		{rosalind, member(2, &pb.CourseRole{Course: "PHY 118", Role: asst}), false, false},
		{rosalind, member(2, &pb.CourseRole{Course: "PHY 214", Role: asst}, &pb.CourseRole{Course: "PHY 301", Role: asst}), false, false},
		{rosalind, member(3, &pb.CourseRole{Course: "PHY 214", Role: instr}), false, false},
		{rosalind, member(1, &pb.CourseRole{Course: "PHY 214", Role: instr}), false, false},
		{rosalind, member(1, &pb.CourseRole{Course: "PHY 214", Role: instr}), true, true},
		{&who{admin: true}, member(3, &pb.CourseRole{Course: "PHY 214", Role: instr}), false, true},
		{nil, member(2, &pb.CourseRole{Course: "PHY 214", Role: asst}), false, false},
	} {
		if got := tc.w.manages(tc.m, tc.self); got != tc.may {
			t.Errorf("%+v manages %v (self %v): %v, want %v", tc.w, tc.m, tc.self, got, tc.may)
		}
	}
	if !rosalind.instructs("PHY 214") || rosalind.instructs("PHY 118") || !rosalind.instructsAny() {
		t.Error("instructs: wrong courses")
	}
	if got, want := rosalind.describe(), "Rosalind Achterberg · assistant of PHY 118, instructor of PHY 214"; got != want {
		t.Errorf("describe: %q, want %q", got, want)
	}
}
