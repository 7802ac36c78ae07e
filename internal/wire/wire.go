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
	out := make(map[string]*pb.Quantity, len(m))
	for k, q := range m {
		out[k] = &pb.Quantity{Value: q.Value, Unit: q.Unit, Uncertainty: q.Uncertainty}
	}
	return out
}

// QuantitiesFromPB converts a map of quantities from the wire.
func QuantitiesFromPB(m map[string]*pb.Quantity) map[string]domain.Quantity {
	out := make(map[string]domain.Quantity, len(m))
	for k, q := range m {
		out[k] = domain.Quantity{Value: q.GetValue(), Unit: q.GetUnit(), Uncertainty: q.GetUncertainty()}
	}
	return out
}

// ValuesToPB converts a reading's values for the wire.
func ValuesToPB(v domain.Values) map[string]*pb.Quantity {
	out := make(map[string]*pb.Quantity, len(v))
	for _, nq := range v {
		out[nq.Name] = &pb.Quantity{Value: nq.Value, Unit: nq.Unit, Uncertainty: nq.Uncertainty}
	}
	return out
}

// ValuesFromPB converts a reading's values from the wire, sorted by name.
func ValuesFromPB(m map[string]*pb.Quantity) domain.Values { return domain.ValuesFrom(m) }

// RoleFromPB is a staff role from the wire; "" for none the domain knows.
func RoleFromPB(r pb.StaffRole) domain.Role {
	switch r {
	case pb.StaffRole_STAFF_ROLE_INSTRUCTOR:
		return domain.RoleInstructor
	case pb.StaffRole_STAFF_ROLE_ASSISTANT:
		return domain.RoleAssistant
	}
	return ""
}

// RoleToPB is a staff role for the wire.
func RoleToPB(r domain.Role) pb.StaffRole {
	switch r {
	case domain.RoleInstructor:
		return pb.StaffRole_STAFF_ROLE_INSTRUCTOR
	case domain.RoleAssistant:
		return pb.StaffRole_STAFF_ROLE_ASSISTANT
	}
	return pb.StaffRole_STAFF_ROLE_UNSPECIFIED
}
