package wasmclient

import (
	"context"
	"slices"

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
	// roles are as the server gave them, sorted by course.
	roles []*pb.CourseRole
}

func fetchWho(ctx context.Context, c *api) (*who, error) {
	res, err := unary[pb.WhoAmIResponse](ctx, c, ProcWhoAmI, &pb.WhoAmIRequest{})
	if err != nil {
		return nil, err
	}
	return &who{id: res.StaffId, name: res.Name, admin: res.Administrator, roles: res.Roles}, nil
}

// instructs says whether the person may change the course's set-up and
// grades: its instructors and the administrator.
func (w *who) instructs(course string) bool {
	if w == nil {
		return false
	}
	return w.admin || slices.ContainsFunc(w.roles, func(r *pb.CourseRole) bool {
		return r.Course == course && r.Role == pb.StaffRole_STAFF_ROLE_INSTRUCTOR
	})
}

// instructedCourses are the courses the person instructs, sorted (the
// server sends the roles by course).
func (w *who) instructedCourses() []string {
	var out []string
	if w == nil {
		return nil
	}
	for _, r := range w.roles {
		if r.Role == pb.StaffRole_STAFF_ROLE_INSTRUCTOR {
			out = append(out, r.Course)
		}
	}
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
	return w.name + " · " + rolesLine(w.roles)
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

// courseInput is where a person names a course: the courses they instruct
// to pick from, or, for the administrator (or a person who instructs
// none), a course typed in (typed is then true). value follows the choice.
func (w *who) courseInput(id string, value *string) (ui app.UI, typed bool) {
	mine := w.instructedCourses()
	if w == nil || w.admin || len(mine) == 0 {
		return app.Input().ID(id).Value(*value).
			OnInput(textInto(value)), true
	}
	return app.Select().ID(id).OnChange(textInto(value)).Body(app.Range(mine).Slice(func(i int) app.UI {
		return app.Option().Value(mine[i]).Selected(mine[i] == *value).Text(mine[i])
	})), false
}
