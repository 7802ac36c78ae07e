package domain

import (
	"strings"
	"testing"
)

func TestStaffAllows(t *testing.T) {
	rosalind := Staff{ID: 1, Name: "Rosalind Achterberg", Roles: map[string]Role{"PHY 214": RoleInstructor, "PHY 118": RoleAssistant}}
	revoked := rosalind
	revoked.Revoked = true
	for _, tc := range []struct {
		who    Staff
		act    Action
		course string
		ok     bool
		why    string
	}{
		{rosalind, ActOverride, "PHY 214", true, ""},
		{rosalind, ActOverride, "PHY 118", false, "an assistant of course \"PHY 118\", and only its instructors may override a grade"},
		{rosalind, ActNote, "PHY 118", true, ""},
		{rosalind, ActExport, "PHY 118", true, ""},
		{rosalind, ActBackup, "PHY 118", false, "only its instructors may back up"},
		{rosalind, ActWatch, "PHY 301", false, "no role in course \"PHY 301\""},
		{revoked, ActWatch, "PHY 214", false, "revoked"},
	} {
		ok, why := tc.who.Allows(tc.act, tc.course)
		if ok != tc.ok || !strings.Contains(why, tc.why) {
			t.Errorf("%s may %s in %s: %v %q; want %v, saying %q", tc.who.Name, tc.act, tc.course, ok, why, tc.ok, tc.why)
		}
	}
	if got := rosalind.Courses(ActWatch); strings.Join(got, ",") != "PHY 118,PHY 214" {
		t.Errorf("courses to watch: %v", got)
	}
	if got := rosalind.Courses(ActSetUp); strings.Join(got, ",") != "PHY 214" {
		t.Errorf("courses to set up: %v", got)
	}
	if got := revoked.Courses(ActWatch); len(got) != 0 {
		t.Errorf("a revoked account's courses: %v", got)
	}
}

func TestStaffMayManage(t *testing.T) {
	rosalind := Staff{Name: "Rosalind Achterberg", Roles: map[string]Role{"PHY 214": RoleInstructor, "PHY 118": RoleAssistant}}
	for _, tc := range []struct {
		roles map[string]Role
		ok    bool
	}{
		{map[string]Role{"PHY 214": RoleAssistant}, true},
		{map[string]Role{"PHY 214": RoleInstructor}, false},
		{map[string]Role{"PHY 118": RoleAssistant}, false},
		{map[string]Role{"PHY 214": RoleAssistant, "PHY 301": RoleAssistant}, false},
	} {
		if ok, why := rosalind.MayManage(tc.roles); ok != tc.ok || ok == (why != "") {
			t.Errorf("manage %v: %v %q, want %v", tc.roles, ok, why, tc.ok)
		}
	}
}

func TestValidateStaff(t *testing.T) {
	field := func(c string) string { return "roles[" + c + "]" }
	for _, tc := range []struct {
		s      Staff
		fields []string
	}{
		{Staff{Name: "Teo Vasquez-Lind", Roles: map[string]Role{"PHY 214": RoleAssistant}}, nil},
		{Staff{Name: " Teo", Roles: map[string]Role{"PHY 214": RoleAssistant}}, []string{"name"}},
		{Staff{Name: strings.Repeat("x", 81), Roles: map[string]Role{"PHY 214": RoleAssistant}}, []string{"name"}},
		{Staff{Name: "Teo"}, []string{"roles"}},
		{Staff{Name: "Teo", Roles: map[string]Role{"": RoleAssistant, "PHY 1": "admin"}}, []string{"roles[].course", "roles[PHY 1].role"}},
	} {
		err := ValidateStaff(tc.s, field)
		var got []string
		if ve, ok := err.(*ValidationError); ok {
			for _, v := range ve.Violations {
				got = append(got, v.Field)
			}
		}
		if strings.Join(got, " ") != strings.Join(tc.fields, " ") {
			t.Errorf("ValidateStaff(%+v): fields %v, want %v", tc.s, got, tc.fields)
		}
	}
}
