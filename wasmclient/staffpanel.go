package wasmclient

import (
	"context"
	"fmt"

	"github.com/maxence-charriere/go-app/v9/pkg/app"

	"example.com/fluxroom/internal/wire"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// StaffPanel is where an instructor manages their courses' assistants
// (and the administrator everyone): who holds a key, a new account, a
// new key, a revoked one. A new key is shown once, here.
type StaffPanel struct {
	app.Compo
	Who *who

	client *api
	staff  []*pb.StaffMember
	// The new account's form.
	name, course string
	role         pb.StaffRole
	// shown is the key just made, with whose it is; gone at the next
	// change.
	shownKey, shownFor string
	status             string
	errs               map[string]string
}

// OnMount loads the accounts the key may manage.
func (p *StaffPanel) OnMount(ctx app.Context) {
	p.client = newAPI(baseURL()).withToken(storedKey(ctx))
	p.role = pb.StaffRole_STAFF_ROLE_ASSISTANT
	if mine := p.Who.instructedCourses(); len(mine) > 0 {
		p.course = mine[0]
	}
	p.reload(ctx)
}

func (p *StaffPanel) reload(ctx app.Context) {
	c := p.client
	ctx.Async(func() {
		list, err := listStaff(ctx, c)
		ctx.Dispatch(func(app.Context) {
			if err != nil {
				p.status = "cannot list staff: " + err.Error()
				return
			}
			p.staff = list
		})
	})
}

// listStaff reads the accounts; called on the goroutine of the change
// before it, so the list shown is the one after it.
func listStaff(ctx context.Context, c *api) ([]*pb.StaffMember, error) {
	res, err := unary[pb.ListStaffResponse](ctx, c, ProcListStaff, &pb.ListStaffRequest{})
	if err != nil {
		return nil, err
	}
	return res.Staff, nil
}

func (p *StaffPanel) add(ctx app.Context, e app.Event) {
	e.PreventDefault()
	req := &pb.AddStaffRequest{Name: p.name, Roles: []*pb.CourseRole{{Course: p.course, Role: p.role}}}
	p.changeThenList(ctx, func(c *api) (*pb.StaffMember, string, error) {
		res, err := unary[pb.AddStaffResponse](ctx, c, ProcAddStaff, req)
		if err != nil {
			return nil, "", err
		}
		return res.Staff, res.Key, nil
	}, "not added: ", func() { p.name = "" })
}

// revoke revokes the account's key, or with a course removes only the
// role in that course.
func (p *StaffPanel) revoke(ctx app.Context, m *pb.StaffMember, course string) {
	p.changeThenList(ctx, func(c *api) (*pb.StaffMember, string, error) {
		_, err := unary[pb.RevokeStaffResponse](ctx, c, ProcRevokeStaff, &pb.RevokeStaffRequest{StaffId: m.StaffId, Course: course})
		return nil, "", err
	}, "not revoked: ", func() {
		p.status = fmt.Sprintf("%s's key was revoked: it stopped working at once, open rooms too", m.Name)
		if course != "" {
			p.status = fmt.Sprintf("%s no longer assists in %s", m.Name, course)
		}
	})
}

// removable are the courses where the viewer may take the person's role
// away without revoking their key: assistant roles in courses the viewer
// instructs, when the person also has roles elsewhere.
func (p *StaffPanel) removable(m *pb.StaffMember) []string {
	if p.Who == nil || p.Who.admin || m.Revoked || p.Who.manages(m, false) {
		return nil
	}
	var out []string
	for _, r := range m.Roles {
		if r.Role == pb.StaffRole_STAFF_ROLE_ASSISTANT && p.Who.instructs(r.Course) {
			out = append(out, r.Course)
		}
	}
	return out
}

func (p *StaffPanel) rotate(ctx app.Context, m *pb.StaffMember) {
	p.changeThenList(ctx, func(c *api) (*pb.StaffMember, string, error) {
		res, err := unary[pb.RotateStaffKeyResponse](ctx, c, ProcRotateStaffKey, &pb.RotateStaffKeyRequest{StaffId: m.StaffId})
		if err != nil {
			return nil, "", err
		}
		return res.Staff, res.Key, nil
	}, "no new key: ", nil)
}

// changeThenList makes a change off the UI goroutine and reads the list
// after it on the same goroutine, then shows both at once: the key the
// change made (if any), or why it failed; done runs after a success.
func (p *StaffPanel) changeThenList(ctx app.Context, change func(*api) (*pb.StaffMember, string, error), failed string, done func()) {
	c := p.client
	ctx.Async(func() {
		who, key, err := change(c)
		var list []*pb.StaffMember
		if err == nil {
			list, _ = listStaff(ctx, c)
		}
		ctx.Dispatch(func(app.Context) {
			p.errs, p.shownKey, p.status = fieldMessages(err), "", ""
			if err != nil {
				p.status = failed + err.Error()
				return
			}
			p.staff = list
			if key != "" {
				p.shownKey, p.shownFor = key, who.Name
			} else if who != nil {
				p.status = fmt.Sprintf("%s already had an account: the new role is added and their key is unchanged", who.Name)
			}
			if done != nil {
				done()
			}
		})
	})
}

// Render draws the list, the new key when one was just made, and the form.
func (p *StaffPanel) Render() app.UI {
	course, _ := p.Who.courseInput("staff-course", &p.course)
	return app.Section().Class("staff").ID("staff").Body(
		app.H2().Text("Staff"),
		app.P().Class("hint").Text("Each person has their own key; the audit log names them. Assistants watch rooms, acknowledge alerts, add notes, correct group members and export; grades, policy and set-up stay with the course's instructors."),
		app.Table().ID("staff-list").Body(
			app.Tr().Body(app.Th().Text("name"), app.Th().Text("roles"), app.Th().Text("key"), app.Th()),
			app.Range(p.staff).Slice(func(i int) app.UI {
				m := p.staff[i]
				state := "active"
				if m.Revoked {
					state = "revoked"
				}
				removable := p.removable(m)
				return app.Tr().Attr("data-staff", m.Name).Body(
					app.Td().Text(m.Name),
					app.Td().Text(rolesLine(m.Roles)),
					app.Td().Class("state").Text(state),
					app.Td().Body(
						app.If(p.Who.manages(m, true), app.Button().Class("rotate").Text("New key").OnClick(func(ctx app.Context, e app.Event) { p.rotate(ctx, m) })),
						app.If(!m.Revoked && p.Who.manages(m, false), app.Button().Class("revoke").Text("Revoke").OnClick(func(ctx app.Context, e app.Event) { p.revoke(ctx, m, "") })),
						app.Range(removable).Slice(func(j int) app.UI {
							course := removable[j]
							return app.Button().Class("remove-role").Text("Remove from " + course).OnClick(func(ctx app.Context, e app.Event) { p.revoke(ctx, m, course) })
						}),
					),
				)
			}),
		),
		app.If(p.shownKey != "", app.Div().Class("new-key").ID("new-key").Attr("role", "status").Body(
			app.P().Text(fmt.Sprintf("Key of %s, shown this once (only its hash is stored). Give it to them in person or by a private message:", p.shownFor)),
			app.Code().ID("new-key-value").Text(p.shownKey),
			app.P().Body(app.Text("Their dashboard: "), app.Code().ID("new-key-link").Text(baseURL()+"/#key="+p.shownKey)),
		)),
		app.Form().ID("staff-form").OnSubmit(p.add).Body(
			field("staff-name", "name", "Name", p.errs["name"], app.Input().ID("staff-name").Value(p.name).
				OnInput(textInto(&p.name))),
			field("staff-course", "roles[0].course", "Course", p.errs["roles[0].course"], course),
			app.If(p.Who != nil && p.Who.admin, app.Select().ID("staff-role").OnChange(func(ctx app.Context, e app.Event) {
				p.role = pb.StaffRole_STAFF_ROLE_ASSISTANT
				if ctx.JSSrc().Get("value").String() == "instructor" {
					p.role = pb.StaffRole_STAFF_ROLE_INSTRUCTOR
				}
			}).Body(
				app.Option().Value("assistant").Selected(p.role == pb.StaffRole_STAFF_ROLE_ASSISTANT).Text("assistant"),
				app.Option().Value("instructor").Selected(p.role == pb.StaffRole_STAFF_ROLE_INSTRUCTOR).Text("instructor"),
			)),
			app.Button().Type("submit").ID("add-staff").Text("Add and make a key"),
		),
		app.P().Class("status").ID("staff-status").Text(p.status),
	)
}

// rolesLine is "assistant of PHY 214, instructor of PHY 118".
func rolesLine(roles []*pb.CourseRole) string {
	out := ""
	for i, r := range roles {
		if i > 0 {
			out += ", "
		}
		out += string(wire.RoleFromPB(r.Role)) + " of " + r.Course
	}
	return out
}
