package main

import (
	"context"
	"fmt"
	"strings"
	"testing"

	"github.com/chromedp/chromedp"

	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

// TestAssistantSeesOnlyTheirRoom: an assistant signs in with their own key
// and finds their course's room, never another course's; no set-up link
// and no grade override. Their instructor adds an assistant on the set-up
// page and is shown the new key once.
func TestAssistantSeesOnlyTheirRoom(t *testing.T) {
	r := newUIRig(t, "F1", "F2")
	ctx := context.Background()
	// Another course's session, newer, so a room page that ignored the key's
	// scope would open it first.
	other, err := r.in.CreateSession(ctx, &pb.CreateSessionRequest{Title: "Kestrel Vale · PHY 118 · Friday", Course: "PHY 118"})
	if err != nil {
		t.Fatal(err)
	}
	staff := rpcpb.NewStaffServiceClient(r.conn)
	add := func(name string, role pb.StaffRole) string {
		res, err := staff.AddStaff(ctx, &pb.AddStaffRequest{Name: name, Roles: []*pb.CourseRole{{Course: r.sess.Course, Role: role}}})
		if err != nil {
			t.Fatal(err)
		}
		return res.Key
	}
	asst := add("Teo Vasquez-Lind", pb.StaffRole_STAFF_ROLE_ASSISTANT)
	// An assistant of this course and of another one.
	if _, err := staff.AddStaff(ctx, &pb.AddStaffRequest{Name: "Kwame Desrosiers", Roles: []*pb.CourseRole{
		{Course: r.sess.Course, Role: pb.StaffRole_STAFF_ROLE_ASSISTANT}, {Course: "PHY 118", Role: pb.StaffRole_STAFF_ROLE_ASSISTANT}}}); err != nil {
		t.Fatal(err)
	}
	instr := add("Rosalind Achterberg", pb.StaffRole_STAFF_ROLE_INSTRUCTOR)

	r.do(t, "the assistant's room",
		chromedp.Navigate(fmt.Sprintf("http://%s/#key=%s", r.p.addr, asst)),
		chromedp.WaitVisible(chromedp.CSS(`section[data-bench="F1"]`)),
		chromedp.WaitVisible(chromedp.CSS(`#who-name`)),
	)
	title, _ := chromedp.Run(r.tab, chromedp.Text(chromedp.CSS(`.room-head h1`)))
	whoText, _ := chromedp.Run(r.tab, chromedp.Text(chromedp.CSS(`#who-name`)))
	if title != r.sess.Title || strings.Contains(title, other.Session.Title) {
		t.Errorf("the assistant's room is %q, want %q", title, r.sess.Title)
	}
	if want := "Teo Vasquez-Lind · assistant of " + r.sess.Course; whoText != want {
		t.Errorf("signed in as %q, want %q", whoText, want)
	}
	links, _ := chromedp.Run(r.tab, chromedp.Evaluate[int](`document.querySelectorAll('#to-setup, #session-pick').length`))
	if links != 0 {
		t.Errorf("the assistant sees %d set-up link or room picker, want none (one room, no set-up)", links)
	}
	r.do(t, "the assistant opens a bench",
		chromedp.Click(chromedp.CSS(`section[data-bench="F1"]`)),
		chromedp.WaitVisible(chromedp.CSS(`#detail #note-form, #detail .note-form, #detail #members-text`)),
	)
	forms, _ := chromedp.Run(r.tab, chromedp.Evaluate[int](`document.querySelectorAll('#detail .override-form').length`))
	if forms != 0 {
		t.Error("the assistant is shown the grade override form")
	}
	screenshot(t, r.tab, "assistant-room.png")

	r.do(t, "the instructor adds an assistant on the set-up page",
		chromedp.Navigate(fmt.Sprintf("http://%s/setup?session=%d#key=%s", r.p.addr, r.sess.SessionId, instr)),
		chromedp.WaitVisible(chromedp.CSS(`#staff-list tr[data-staff="Teo Vasquez-Lind"]`)),
		chromedp.Evaluate[chromedp.Void](`(() => { const i = document.querySelector('#staff-name'); i.value = 'Pavla Oyelaran'; i.dispatchEvent(new Event('input', {bubbles: true})) })()`),
		chromedp.Click(chromedp.CSS(`#add-staff`)),
		chromedp.WaitVisible(chromedp.CSS(`#new-key-value`)),
		chromedp.WaitVisible(chromedp.CSS(`#staff-list tr[data-staff="Pavla Oyelaran"]`)),
	)
	checkLabels(t, r, "the set-up page")
	key, _ := chromedp.Run(r.tab, chromedp.Text(chromedp.CSS(`#new-key-value`)))
	// The instructor takes the two-course assistant off her course only:
	// he leaves her list and keeps his other course.
	r.do(t, "remove a role",
		chromedp.Click(chromedp.CSS(`#staff-list tr[data-staff="Kwame Desrosiers"] .remove-role`)),
		chromedp.WaitNotPresent(chromedp.CSS(`#staff-list tr[data-staff="Kwame Desrosiers"]`)))
	all, err := staff.ListStaff(ctx, &pb.ListStaffRequest{})
	if err != nil {
		t.Fatal(err)
	}
	for _, m := range all.Staff {
		if m.Name == "Kwame Desrosiers" && (m.Revoked || len(m.Roles) != 1 || m.Roles[0].Course != "PHY 118") {
			t.Errorf("after Remove from %s: %v, want an active assistant of PHY 118 only", r.sess.Course, m)
		}
	}
	who, err := rpcpb.NewStaffServiceClient(dialKey(t, r.p.addr, key)).WhoAmI(ctx, &pb.WhoAmIRequest{})
	if err != nil || who.Name != "Pavla Oyelaran" || len(who.Roles) != 1 || who.Roles[0].Course != r.sess.Course || who.Roles[0].Role != pb.StaffRole_STAFF_ROLE_ASSISTANT {
		t.Errorf("the key shown on the set-up page: %v, %v; want Pavla Oyelaran, assistant of %s", who, err, r.sess.Course)
	}
	screenshot(t, r.tab, "setup-staff.png")
}

// checkLabels fails the test when a label on the page names no element: a
// screen reader then reads the input without its label.
func checkLabels(t *testing.T, r *uiRig, page string) {
	t.Helper()
	dangling, err := chromedp.Run(r.tab, chromedp.Evaluate[[]string](`[...document.querySelectorAll('label[for]')].filter(l => !document.getElementById(l.htmlFor)).map(l => l.htmlFor)`))
	if err != nil {
		t.Fatal(err)
	}
	if len(dangling) > 0 {
		t.Errorf("%s: labels for no element: %v", page, dangling)
	}
}

// TestEveryLabelHasItsInput: the station page, joined and not, labels
// every input it shows.
func TestEveryLabelHasItsInput(t *testing.T) {
	r := newUIRig(t, "G1")
	r.do(t, "the join form",
		chromedp.Navigate(fmt.Sprintf("http://%s/station", r.p.addr)),
		chromedp.WaitVisible(chromedp.CSS(`main.station[data-ready="true"] #join_code`)))
	checkLabels(t, r, "the station's join form")
	r.do(t, "the reading form",
		chromedp.SendKeys(chromedp.CSS(`#join_code`), r.sess.JoinCode),
		chromedp.SendKeys(chromedp.CSS(`#bench_label`), "G1"),
		chromedp.Click(chromedp.CSS(`#join`)),
		chromedp.WaitVisible(chromedp.CSS(`main.station[data-ready="true"] #v-force`)))
	checkLabels(t, r, "the station's reading form")
	r.do(t, "the set-up page", chromedp.Navigate(r.url("/setup")), chromedp.WaitVisible(chromedp.CSS(`#constants`)))
	checkLabels(t, r, "the set-up page with a bench's constants")
}
