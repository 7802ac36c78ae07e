package wire

import (
	"testing"

	"example.com/fluxroom/domain"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// TestValuesRoundTrip: a reading's values come back from the wire as sent,
// in name order.
func TestValuesRoundTrip(t *testing.T) {
	in := map[string]*pb.Quantity{"force": {Value: 0.48, Unit: "N", Uncertainty: 0.005}, "current": {Value: 1, Unit: "A"}}
	v := ValuesFromPB(in)
	if len(v) != 2 || v[0].Name != "current" || v.At("force") != (domain.Quantity{Value: 0.48, Unit: "N", Uncertainty: 0.005}) {
		t.Fatalf("ValuesFromPB: %v", v)
	}
	out := ValuesToPB(v)
	if len(out) != 2 || out["force"].GetUncertainty() != 0.005 || out["current"].GetUnit() != "A" {
		t.Errorf("ValuesToPB: %v", out)
	}
}

// BenchmarkReadingValues is the memory a reading's two values take as the
// room keeps them: the domain's Values against the map they replaced
// (B/op; go test -run '^$' -bench ReadingValues -benchmem ./internal/wire/).
func BenchmarkReadingValues(b *testing.B) {
	in := map[string]*pb.Quantity{"current": {Value: 1, Unit: "A"}, "force": {Value: 0.48, Unit: "N"}}
	b.Run("values", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			sinkValues = ValuesFromPB(in)
		}
	})
	b.Run("map", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			sinkMap = QuantitiesFromPB(in)
		}
	})
}

// Kept in package variables so that what is measured is made on the heap,
// as for a reading the room keeps.
var (
	sinkValues domain.Values
	sinkMap    map[string]domain.Quantity
)

// Every staff role the domain knows goes to the wire and back as itself; an
// unknown wire role is none.
func TestRolesRoundTrip(t *testing.T) {
	for _, r := range []domain.Role{domain.RoleInstructor, domain.RoleAssistant} {
		p := RoleToPB(r)
		if p == pb.StaffRole_STAFF_ROLE_UNSPECIFIED || RoleFromPB(p) != r {
			t.Errorf("%q → %v → %q", r, p, RoleFromPB(p))
		}
	}
	if got := RoleFromPB(pb.StaffRole_STAFF_ROLE_UNSPECIFIED); got != "" {
		t.Errorf("unspecified role read as %q", got)
	}
	if got := RoleToPB("dean"); got != pb.StaffRole_STAFF_ROLE_UNSPECIFIED {
		t.Errorf("unknown role sent as %v", got)
	}
}
