package domain

import (
	"fmt"
	"slices"
	"strings"
	"time"
	"unicode"
	"unicode/utf8"
)

// Role is what a person may do in one course.
type Role string

// Roles. The server's administrator is not a role in a course: that key
// may do everything, everywhere.
const (
	RoleInstructor Role = "instructor"
	RoleAssistant  Role = "assistant"
)

// Action is a kind of call on a course's sessions, named as the refusal
// says it.
type Action string

// Actions, each allowed to the roles in mayDo.
const (
	ActWatch            Action = "see its sessions and rooms"
	ActNote             Action = "add notes and acknowledge alerts"
	ActMembers          Action = "correct a group's members"
	ActExport           Action = "export its results"
	ActSubmit           Action = "send readings for a bench"
	ActSetUp            Action = "create sessions and set up benches and tolerances"
	ActPolicy           Action = "set the grading policy"
	ActOverride         Action = "override a grade"
	ActClose            Action = "close a session"
	ActBackup           Action = "back up its sessions"
	ActManageAssistants Action = "manage its assistants"
)

// mayDo lists the roles allowed each action. An assistant helps in the
// room and reads the results; every change to set-up, policy or grades is
// the instructor's.
var mayDo = map[Action][]Role{
	ActWatch:            {RoleInstructor, RoleAssistant},
	ActNote:             {RoleInstructor, RoleAssistant},
	ActMembers:          {RoleInstructor, RoleAssistant},
	ActExport:           {RoleInstructor, RoleAssistant},
	ActSubmit:           {RoleInstructor},
	ActSetUp:            {RoleInstructor},
	ActPolicy:           {RoleInstructor},
	ActOverride:         {RoleInstructor},
	ActClose:            {RoleInstructor},
	ActBackup:           {RoleInstructor},
	ActManageAssistants: {RoleInstructor},
}

// May reports whether the role allows the action.
func (r Role) May(a Action) bool { return slices.Contains(mayDo[a], r) }

// Valid reports whether r is a known role.
func (r Role) Valid() bool { return r == RoleInstructor || r == RoleAssistant }

// Staff is a person's account on a department's server: a name and a role
// in each of their courses.
type Staff struct {
	ID      uint64
	Name    string
	Roles   map[string]Role // course → role
	Revoked bool
	// CreatedAt is when the account was added.
	CreatedAt time.Time
}

// Allows says whether the person may take the action in the course, and if
// not, why, in words for the refusal.
func (s Staff) Allows(a Action, course string) (bool, string) {
	r, ok := s.Roles[course]
	switch {
	case s.Revoked:
		return false, fmt.Sprintf("%s's key has been revoked", s.Name)
	case !ok:
		return false, fmt.Sprintf("%s has no role in course %q", s.Name, course)
	case !r.May(a):
		return false, fmt.Sprintf("%s is %s of course %q, and only its instructors may %s", s.Name, article(r), course, a)
	}
	return true, ""
}

// Courses returns the courses where the person may take the action,
// sorted.
func (s Staff) Courses(a Action) []string {
	var out []string
	for c, r := range s.Roles {
		if r.May(a) && !s.Revoked {
			out = append(out, c)
		}
	}
	slices.Sort(out)
	return out
}

func article(r Role) string {
	if r == RoleAssistant {
		return "an assistant"
	}
	return "an instructor"
}

// MayManage says whether the manager may add, revoke or give a new key to
// an account with these roles: only assistants of courses the manager
// instructs. (The administrator's key manages everyone.)
func (s Staff) MayManage(roles map[string]Role) (bool, string) {
	for _, c := range sortedCourses(roles) {
		if roles[c] != RoleAssistant {
			return false, fmt.Sprintf("only the administrator may give or change the role %s (course %q)", roles[c], c)
		}
		if ok, why := s.Allows(ActManageAssistants, c); !ok {
			return false, why
		}
	}
	return true, ""
}

func sortedCourses(roles map[string]Role) []string {
	out := make([]string, 0, len(roles))
	for c := range roles {
		out = append(out, c)
	}
	slices.Sort(out)
	return out
}

// ValidateCourse checks a course name: one line of 1–80 characters.
func ValidateCourse(field, course string) error {
	if !validLine(course, 80) {
		return Invalid(field, "must be 1–80 characters on one line, such as \"PHY 214\"")
	}
	return nil
}

// ValidateStaff checks a new account's name and roles. roleFields names
// the request field of each course's role, for the error.
func ValidateStaff(s Staff, roleField func(course string) string) error {
	var vs violations
	if !validLine(s.Name, 80) {
		vs.add("name", "must be 1–80 characters on one line, the person's name as colleagues know it")
	}
	if len(s.Roles) == 0 {
		vs.add("roles", "must give the person a role in at least one course")
	}
	for _, c := range sortedCourses(s.Roles) {
		if err := ValidateCourse(roleField(c)+".course", c); err != nil {
			vs = append(vs, err.(*ValidationError).Violations...)
		}
		if !s.Roles[c].Valid() {
			vs.add(roleField(c)+".role", "must be instructor or assistant")
		}
	}
	return vs.err()
}

// validLine: trimmed, 1–max characters, valid UTF-8, no control characters.
func validLine(s string, max int) bool {
	return s != "" && s == strings.TrimSpace(s) && utf8.ValidString(s) && utf8.RuneCountInString(s) <= max &&
		!strings.ContainsFunc(s, unicode.IsControl)
}
