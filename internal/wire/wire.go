// Package wire converts the quantities every client and the server send
// between the domain's type and the wire's. It imports only the domain and
// the message package, so the browser build may use it too.
package wire

import (
	"example.com/fluxroom/domain"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// QuantitiesToPB converts a map of quantities for the wire.
func QuantitiesToPB(m map[string]domain.Quantity) map[string]*pb.Quantity {
	return domain.QuantitiesTo(m, quantityToPB)
}

// QuantitiesFromPB converts a map of quantities from the wire.
func QuantitiesFromPB(m map[string]*pb.Quantity) map[string]domain.Quantity {
	return domain.QuantitiesFrom(m)
}

// ValuesToPB converts a reading's values for the wire.
func ValuesToPB(v domain.Values) map[string]*pb.Quantity { return domain.ValuesTo(v, quantityToPB) }

// ValuesFromPB converts a reading's values from the wire, sorted by name.
func ValuesFromPB(m map[string]*pb.Quantity) domain.Values { return domain.ValuesFrom(m) }

func quantityToPB(q domain.Quantity) *pb.Quantity {
	return &pb.Quantity{Value: q.Value, Unit: q.Unit, Uncertainty: q.Uncertainty}
}

// roles pairs each staff role the domain knows with the wire's.
var roles = [...]struct {
	pb     pb.StaffRole
	domain domain.Role
}{
	{pb.StaffRole_STAFF_ROLE_INSTRUCTOR, domain.RoleInstructor},
	{pb.StaffRole_STAFF_ROLE_ASSISTANT, domain.RoleAssistant},
}

// RoleFromPB is a staff role from the wire; "" for none the domain knows.
func RoleFromPB(r pb.StaffRole) domain.Role {
	for _, p := range roles {
		if p.pb == r {
			return p.domain
		}
	}
	return ""
}

// RoleToPB is a staff role for the wire.
func RoleToPB(r domain.Role) pb.StaffRole {
	for _, p := range roles {
		if p.domain == r {
			return p.pb
		}
	}
	return pb.StaffRole_STAFF_ROLE_UNSPECIFIED
}
