package wasmclient

import (
	"context"
	"sort"

	"github.com/maxence-charriere/go-app/v9/pkg/app"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// who is the person whose key this browser holds, as the server knows
// them. The server decides every call; the dashboard only leaves out the
// controls a role cannot use.
type who struct {
	id    uint64
	name  string
	admin bool
	roles map[string]pb.StaffRole
	// list is the roles as the server gave them, sorted by course.
	list []*pb.CourseRole
}

func fetchWho(ctx context.Context, c *api) (*who, error) {
	res, err := unary[pb.WhoAmIResponse](ctx, c, ProcWhoAmI, &pb.WhoAmIRequest{})
	if err != nil {
		return nil, err
	}
	w := &who{id: res.StaffId, name: res.Name, admin: res.Administrator, roles: map[string]pb.StaffRole{}, list: res.Roles}
	for _, r := range res.Roles {
		w.roles[r.Course] = r.Role
	}
	return w, nil
}

// instructs says whether the person may change the course's set-up and
// grades: its instructors and the administrator.
func (w *who) instructs(course string) bool {
	return w != nil && (w.admin || w.roles[course] == pb.StaffRole_STAFF_ROLE_INSTRUCTOR)
}

// instructedCourses are the courses the person instructs, sorted.
func (w *who) instructedCourses() []string {
	var out []string
	if w == nil {
		return nil
	}
	for c, r := range w.roles {
		if r == pb.StaffRole_STAFF_ROLE_INSTRUCTOR {
			out = append(out, c)
		}
	}
	sort.Strings(out)
	return out
}

// manages says whether the person may revoke the account (or, with self
// allowed, give it a new key): the administrator anyone; an instructor
// the accounts whose every role is assistant of a course they instruct.
func (w *who) manages(m *pb.StaffMember, self bool) bool {
	switch {
	case w == nil:
		return false
	case w.admin, self && m.StaffId == w.id:
		return true
	}
	for _, r := range m.Roles {
		if r.Role != pb.StaffRole_STAFF_ROLE_ASSISTANT || !w.instructs(r.Course) {
			return false
		}
	}
	return len(m.Roles) > 0
}

// instructsAny says whether the set-up page is of use to the person.
func (w *who) instructsAny() bool { return w != nil && (w.admin || len(w.instructedCourses()) > 0) }

// describe is "Teo Vasquez-Lind · assistant of PHY 214".
func (w *who) describe() string {
	if w == nil {
		return ""
	}
	if w.admin {
		return "administrator · every course"
	}
	return w.name + " · " + rolesLine(w.list)
}

// whoBar shows whose key is in use, with a way to use another.
func whoBar(w *who) app.UI {
	if w == nil {
		return app.Span().Class("who").ID("who")
	}
	return app.Span().Class("who").ID("who").Body(
		app.Span().ID("who-name").Text(w.describe()),
		app.Button().ID("sign-out").Class("link-button").Text("Use another key").OnClick(func(ctx app.Context, e app.Event) {
			ctx.LocalStorage().Del(storageKey)
			ctx.Reload()
		}),
	)
}
