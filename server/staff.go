package server

import (
	"context"
	"crypto/sha256"
	"errors"
	"fmt"
	"maps"
	"slices"
	"strings"
	"sync"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/types/known/timestamppb"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/wire"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

// caller is the person behind a staff call: the administrator's key, or a
// staff account.
type caller struct {
	admin bool
	staff domain.Staff
}

// adminName is how the audit log names the administrator's key.
const adminName = "administrator"

func (c caller) name() string {
	if c.admin {
		return adminName
	}
	return c.staff.Name
}

// allows returns nil when the caller may take the action in the course,
// else PermissionDenied with the reason.
func (c caller) allows(a domain.Action, course string) error {
	if c.admin {
		return nil
	}
	if ok, why := c.staff.Allows(a, course); !ok {
		return status.Error(codes.PermissionDenied, why)
	}
	return nil
}

// courses says which courses the caller may take the action in; all is
// true for the administrator.
func (c caller) courses(a domain.Action) (courses []string, all bool) {
	if c.admin {
		return nil, true
	}
	return c.staff.Courses(a), false
}

type callerKey struct{}

// callerOf returns the caller authorize found for a staff call.
func callerOf(ctx context.Context) (caller, bool) {
	c, ok := ctx.Value(callerKey{}).(caller)
	return c, ok
}

// staffKeys is the server's view of the staff accounts: every key's hash
// to its account, and each account's open streams, ended when its key is
// revoked or replaced. Only the StaffService changes accounts, under mu,
// writing the file first.
type staffKeys struct {
	mu      sync.RWMutex
	byHash  map[[32]byte]uint64
	byID    map[uint64]store.StaffAccount
	streams map[uint64]map[*int]context.CancelCauseFunc
}

func loadStaffKeys(db *store.DB) (*staffKeys, error) {
	all, err := db.StaffAccounts()
	if err != nil {
		return nil, err
	}
	k := &staffKeys{byHash: map[[32]byte]uint64{}, byID: map[uint64]store.StaffAccount{}, streams: map[uint64]map[*int]context.CancelCauseFunc{}}
	for _, a := range all {
		k.put(a)
	}
	return k, nil
}

// put records an account as stored; call with mu held (or before sharing).
func (k *staffKeys) put(a store.StaffAccount) {
	if old, ok := k.byID[a.ID]; ok {
		delete(k.byHash, [32]byte(old.KeyHash))
	}
	k.byID[a.ID] = a
	if len(a.KeyHash) == sha256.Size {
		k.byHash[[32]byte(a.KeyHash)] = a.ID
	}
}

// lookup finds the account of a key's hash, revoked ones too.
func (k *staffKeys) lookup(hash [32]byte) (domain.Staff, bool) {
	k.mu.RLock()
	defer k.mu.RUnlock()
	id, ok := k.byHash[hash]
	if !ok {
		return domain.Staff{}, false
	}
	return k.byID[id].Staff, true
}

// watch ties a stream's context to the account: it ends, with the reason,
// when the account's key stops working.
func (k *staffKeys) watch(ctx context.Context, staffID uint64) (context.Context, func()) {
	ctx, cancel := context.WithCancelCause(ctx)
	tag := new(int)
	k.mu.Lock()
	if k.streams[staffID] == nil {
		k.streams[staffID] = map[*int]context.CancelCauseFunc{}
	}
	k.streams[staffID][tag] = cancel
	k.mu.Unlock()
	return ctx, func() {
		k.mu.Lock()
		delete(k.streams[staffID], tag)
		k.mu.Unlock()
		cancel(nil)
	}
}

// endStreams ends every open stream of an account; call with mu held.
func (k *staffKeys) endStreams(staffID uint64, why string) {
	for _, cancel := range k.streams[staffID] {
		cancel(status.Error(codes.Unauthenticated, why))
	}
	delete(k.streams, staffID)
}

type staffService struct {
	rpcpb.UnimplementedStaffServiceServer
	s *Server
}

func rolesToPB(roles map[string]domain.Role) []*pb.CourseRole {
	var out []*pb.CourseRole
	for _, c := range slices.Sorted(maps.Keys(roles)) {
		out = append(out, &pb.CourseRole{Course: c, Role: wire.RoleToPB(roles[c])})
	}
	return out
}

func staffToPB(s domain.Staff) *pb.StaffMember {
	m := &pb.StaffMember{StaffId: s.ID, Name: s.Name, Roles: rolesToPB(s.Roles), Revoked: s.Revoked}
	if !s.CreatedAt.IsZero() {
		m.CreatedAt = timestamppb.New(s.CreatedAt)
	}
	return m
}

// staffCaller is the caller of a StaffService call.
func staffCaller(ctx context.Context) (caller, error) {
	c, ok := callerOf(ctx)
	if !ok {
		return caller{}, status.Error(codes.Unauthenticated, "this call needs a staff key or the administrator's key")
	}
	return c, nil
}

// AddStaff creates an account with a name and a role per course, and returns its key once; for a
// name that already has an active account, it adds the roles to that account and returns no key.
// The administrator adds anyone; an instructor adds assistants to their own courses.
func (ss staffService) AddStaff(ctx context.Context, req *pb.AddStaffRequest) (*pb.AddStaffResponse, error) {
	c, err := staffCaller(ctx)
	if err != nil {
		return nil, err
	}
	st := domain.Staff{Name: strings.TrimSpace(req.GetName()), Roles: map[string]domain.Role{}, CreatedAt: ss.s.now()}
	field := map[string]string{}
	var vs []domain.FieldViolation
	for i, r := range req.GetRoles() {
		course := strings.TrimSpace(r.GetCourse())
		f := fmt.Sprintf("roles[%d]", i)
		if _, dup := st.Roles[course]; dup {
			vs = append(vs, domain.FieldViolation{Field: f + ".course", Reason: fmt.Sprintf("course %q is given twice", course)})
		}
		st.Roles[course], field[course] = wire.RoleFromPB(r.GetRole()), f
	}
	if err := domain.ValidateStaff(st, func(course string) string { return field[course] }); err != nil {
		var ve *domain.ValidationError
		errors.As(err, &ve)
		vs = append(vs, ve.Violations...)
	}
	if len(vs) > 0 {
		return nil, &domain.ValidationError{Violations: vs}
	}
	if !c.admin {
		if ok, why := c.staff.MayManage(st.Roles); !ok {
			return nil, status.Error(codes.PermissionDenied, why)
		}
	}
	k := ss.s.staff
	k.mu.Lock()
	defer k.mu.Unlock()
	// A name is one person: the audit log names people. Roles for an
	// active account of that name are added to it, and its key stays.
	for _, a := range k.byID {
		if !a.Revoked && strings.EqualFold(a.Name, st.Name) {
			return ss.addRoles(c, a, st.Roles, field)
		}
	}
	key := newKey()
	hash := hashKey(key)
	if st, err = ss.s.db.AddStaff(st, hash); err != nil {
		return nil, err
	}
	k.put(store.StaffAccount{Staff: st, KeyHash: hash})
	ss.s.log.Info("staff added", "staff_id", st.ID, "name", st.Name, "by", c.name())
	return &pb.AddStaffResponse{Staff: staffToPB(st), Key: key}, nil
}

// addRoles gives an existing account roles in more courses; a course it
// already has a role in must keep that role. The answer carries no key:
// the person's key is unchanged. Call with the staff lock held.
func (ss staffService) addRoles(c caller, a store.StaffAccount, roles map[string]domain.Role, field map[string]string) (*pb.AddStaffResponse, error) {
	var vs []domain.FieldViolation
	merged := maps.Clone(a.Roles)
	for course, r := range roles {
		if have, ok := a.Roles[course]; ok && have != r {
			vs = append(vs, domain.FieldViolation{Field: field[course] + ".role",
				Reason: fmt.Sprintf("%s is already %s of %q; revoke the account and add it again to change a role", a.Name, have, course)})
		}
		merged[course] = r
	}
	if len(vs) > 0 {
		return nil, &domain.ValidationError{Violations: vs}
	}
	a, err := ss.s.db.SetStaffRoles(a.ID, merged)
	if err != nil {
		return nil, err
	}
	ss.s.staff.put(a)
	ss.s.log.Info("staff roles added", "staff_id", a.ID, "name", a.Name, "by", c.name())
	return &pb.AddStaffResponse{Staff: staffToPB(a.Staff)}, nil
}

// ListStaff lists the accounts the caller may manage: all of them for the administrator, the
// people with a role in an instructor's own courses for an instructor.
func (ss staffService) ListStaff(ctx context.Context, req *pb.ListStaffRequest) (*pb.ListStaffResponse, error) {
	c, err := staffCaller(ctx)
	if err != nil {
		return nil, err
	}
	mine, all := c.courses(domain.ActManageAssistants)
	if !all && len(mine) == 0 {
		return nil, status.Errorf(codes.PermissionDenied, "%s is an instructor of no course, and only instructors and the administrator may list staff", c.name())
	}
	k := ss.s.staff
	k.mu.RLock()
	defer k.mu.RUnlock()
	out := &pb.ListStaffResponse{}
	for _, id := range slices.Sorted(maps.Keys(k.byID)) {
		a := k.byID[id]
		if all || slices.ContainsFunc(mine, func(course string) bool { _, ok := a.Roles[course]; return ok }) {
			out.Staff = append(out.Staff, staffToPB(a.Staff))
		}
	}
	return out, nil
}

// target finds the account a call names and checks the caller may manage
// it: all its roles, or with course set, its role in that course only;
// self lets a person act on their own account. Call with k.mu held.
func (ss staffService) target(c caller, id uint64, self bool, course string) (store.StaffAccount, error) {
	a, ok := ss.s.staff.byID[id]
	if !ok {
		return store.StaffAccount{}, domain.Invalid("staff_id", "no staff account %d", id)
	}
	over := a.Roles
	if course != "" {
		role, ok := a.Roles[course]
		if !ok {
			return store.StaffAccount{}, domain.Invalid("course", "%s has no role in course %q", a.Name, course)
		}
		over = map[string]domain.Role{course: role}
	}
	if c.admin || self && c.staff.ID == id {
		return a, nil
	}
	if ok, why := c.staff.MayManage(over); !ok {
		return store.StaffAccount{}, status.Errorf(codes.PermissionDenied, "%s may not change the account of %s: %s", c.name(), a.Name, why)
	}
	return a, nil
}

// RevokeStaff stops an account's key at once: its next call is refused and its open room streams
// end. The account stays, so the audit log still names the person. With a course, only the role in
// that course is removed (the last role revokes the key), which an instructor of that course may do
// for an assistant who also helps in other courses.
func (ss staffService) RevokeStaff(ctx context.Context, req *pb.RevokeStaffRequest) (*pb.RevokeStaffResponse, error) {
	if course := strings.TrimSpace(req.GetCourse()); course != "" {
		a, err := ss.removeRole(ctx, req.GetStaffId(), course)
		if err != nil {
			return nil, err
		}
		return &pb.RevokeStaffResponse{Staff: staffToPB(a.Staff)}, nil
	}
	a, _, err := ss.change(ctx, req.GetStaffId(), false)
	if err != nil {
		return nil, err
	}
	return &pb.RevokeStaffResponse{Staff: staffToPB(a.Staff)}, nil
}

// removeRole takes one course's role from an account; the last one
// revokes it. Its open streams end either way, and reconnect to what the
// key still reaches.
func (ss staffService) removeRole(ctx context.Context, id uint64, course string) (store.StaffAccount, error) {
	c, err := staffCaller(ctx)
	if err != nil {
		return store.StaffAccount{}, err
	}
	k := ss.s.staff
	k.mu.Lock()
	defer k.mu.Unlock()
	a, err := ss.target(c, id, false, course)
	if err != nil {
		return store.StaffAccount{}, err
	}
	if len(a.Roles) == 1 {
		a, _, err := ss.changeLocked(c, a, false)
		return a, err
	}
	roles := maps.Clone(a.Roles)
	delete(roles, course)
	if a, err = ss.s.db.SetStaffRoles(id, roles); err != nil {
		return store.StaffAccount{}, err
	}
	k.put(a)
	k.endStreams(a.ID, fmt.Sprintf("%s's role in course %q was removed by %s", a.Name, course, c.name()))
	ss.s.log.Info("staff role removed", "staff_id", a.ID, "name", a.Name, "course", course, "by", c.name())
	return a, nil
}

// RotateStaffKey gives an account a new key, shown once; the old key stops at once, open streams
// too. A revoked account comes back with the new key. Anyone may rotate their own key.
func (ss staffService) RotateStaffKey(ctx context.Context, req *pb.RotateStaffKeyRequest) (*pb.RotateStaffKeyResponse, error) {
	a, key, err := ss.change(ctx, req.GetStaffId(), true)
	if err != nil {
		return nil, err
	}
	return &pb.RotateStaffKeyResponse{Staff: staffToPB(a.Staff), Key: key}, nil
}

// change revokes an account, or with rotate gives it a new key (returned),
// as the caller may, and ends the streams of its old key with the reason.
// Anyone may rotate their own key, not revoke it.
func (ss staffService) change(ctx context.Context, id uint64, rotate bool) (store.StaffAccount, string, error) {
	c, err := staffCaller(ctx)
	if err != nil {
		return store.StaffAccount{}, "", err
	}
	k := ss.s.staff
	k.mu.Lock()
	defer k.mu.Unlock()
	a, err := ss.target(c, id, rotate, "")
	if err != nil {
		return store.StaffAccount{}, "", err
	}
	return ss.changeLocked(c, a, rotate)
}

// changeLocked is change on an account already found and checked; call
// with the staff lock held.
func (ss staffService) changeLocked(c caller, a store.StaffAccount, rotate bool) (store.StaffAccount, string, error) {
	k := ss.s.staff
	what, key, hash := "revoked", "", []byte(nil)
	if rotate {
		key = newKey()
		what, hash = "replaced", hashKey(key)
	}
	a, err := ss.s.db.UpdateStaff(a.ID, !rotate, hash)
	if err != nil {
		return store.StaffAccount{}, "", err
	}
	k.put(a)
	k.endStreams(a.ID, fmt.Sprintf("the key of %s was %s by %s", a.Name, what, c.name()))
	ss.s.log.Info("staff key "+what, "staff_id", a.ID, "name", a.Name, "by", c.name())
	return a, key, nil
}

// WhoAmI says whose key the call carries and what it may do.
func (ss staffService) WhoAmI(ctx context.Context, req *pb.WhoAmIRequest) (*pb.WhoAmIResponse, error) {
	c, err := staffCaller(ctx)
	if err != nil {
		return nil, err
	}
	return &pb.WhoAmIResponse{Name: c.name(), Administrator: c.admin, Roles: rolesToPB(c.staff.Roles), StaffId: c.staff.ID}, nil
}
