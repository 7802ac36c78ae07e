package server

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/domain"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

// TestStaffScope: what a staff key sees is its courses' sessions, in the
// list, the backup and the audit log; a revoked or replaced key stops at
// once, an open room stream too.
func TestStaffScope(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	mk := func(title, course string) *pb.Session {
		res, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: title, Course: course})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: res.Session.SessionId,
			Benches: []*pb.Bench{forceBench("A1", 0, 0)}}); err != nil {
			t.Fatal(err)
		}
		return res.Session
	}
	fields2, fields5, magnetism := mk("Fields lab, section 2", "PHY 214"), mk("Fields lab, section 5", "PHY 214"), mk("Magnetism, section 1", "PHY 118")
	_, instrKey := addStaff(t, r, "Rosalind Achterberg", map[string]pb.StaffRole{"PHY 214": instructor})
	asstID, asstKey := addStaff(t, r, "Teo Vasquez-Lind", map[string]pb.StaffRole{"PHY 118": assistant})
	instr, asst := dialAs(t, r, instrKey), dialAs(t, r, asstKey)

	titles := func(c rpcpb.InstructorServiceClient) []string {
		res, err := c.ListSessions(ctx, &pb.ListSessionsRequest{})
		if err != nil {
			t.Fatal(err)
		}
		var out []string
		for _, s := range res.Sessions {
			out = append(out, s.Title)
		}
		return out
	}
	if got := titles(rpcpb.NewInstructorServiceClient(asst)); len(got) != 1 || got[0] != magnetism.Title {
		t.Errorf("the assistant of PHY 118 lists %q, want only %q", got, magnetism.Title)
	}
	if got := titles(rpcpb.NewInstructorServiceClient(instr)); len(got) != 2 {
		t.Errorf("the instructor of PHY 214 lists %q, want its two sections", got)
	}
	if got := titles(r.instructor); len(got) != 3 {
		t.Errorf("the administrator lists %q, want all three", got)
	}

	// An instructor's backup holds the course's sessions only.
	bs, err := rpcpb.NewInstructorServiceClient(instr).Backup(ctx, &pb.BackupRequest{})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	for {
		ch, err := bs.Recv()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		buf.Write(ch.Data)
	}
	path := filepath.Join(t.TempDir(), "course.db")
	os.WriteFile(path, buf.Bytes(), 0o600)
	part, err := store.Open(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	ss, _ := part.Sessions()
	part.Close()
	if len(ss) != 2 || ss[0].Course != "PHY 214" || ss[1].Course != "PHY 214" {
		t.Errorf("the PHY 214 instructor's backup holds %+v, want the two PHY 214 sessions", ss)
	}

	// The audit log names the person, never the role; the export and the
	// report show who overrode what.
	ic := rpcpb.NewInstructorServiceClient(instr)
	if _, err := ic.OverrideGrade(ctx, &pb.OverrideGradeRequest{SessionId: fields2.SessionId, BenchId: 1, Points: 3, Reason: "lab partner ill", Author: "someone else"}); err != nil {
		t.Fatal(err)
	}
	if _, err := ic.SetGradingPolicy(ctx, &pb.SetGradingPolicyRequest{SessionId: fields2.SessionId}); err != nil {
		t.Fatal(err)
	}
	if _, err := ic.CloseSession(ctx, &pb.CloseSessionRequest{SessionId: fields5.SessionId}); err != nil {
		t.Fatal(err)
	}
	if _, err := rpcpb.NewInstructorServiceClient(asst).AcknowledgeAlert(ctx, &pb.AcknowledgeAlertRequest{SessionId: magnetism.SessionId, BenchId: 3}); err != nil {
		t.Fatal(err)
	}
	by := func(sid uint64) map[string]string {
		notes, err := r.db.Notes(sid)
		if err != nil {
			t.Fatal(err)
		}
		out := map[string]string{}
		for _, n := range notes {
			out[n.Kind] = n.Author
		}
		return out
	}
	if got := by(fields2.SessionId); got[domain.NoteKindGradeOverride] != "Rosalind Achterberg" || got[domain.NoteKindPolicySet] != "Rosalind Achterberg" || got[domain.NoteKindBenchesSet] != adminName {
		t.Errorf("PHY 214 section 2's audit log by kind: %v", got)
	}
	if got := by(fields5.SessionId); got[domain.NoteKindClosed] != "Rosalind Achterberg" {
		t.Errorf("section 5's close was by %q", got[domain.NoteKindClosed])
	}
	if got := by(magnetism.SessionId); got[domain.NoteKindAcknowledged] != "Teo Vasquez-Lind" {
		t.Errorf("the acknowledgement was by %q", got[domain.NoteKindAcknowledged])
	}
	for _, f := range []pb.ExportFormat{pb.ExportFormat_EXPORT_FORMAT_JSON, pb.ExportFormat_EXPORT_FORMAT_HTML} {
		ex, err := ic.Export(ctx, &pb.ExportRequest{SessionId: fields2.SessionId, Format: f})
		if err != nil {
			t.Fatal(err)
		}
		if !strings.Contains(string(ex.Content), "Rosalind Achterberg") || strings.Contains(string(ex.Content), "someone else") {
			t.Errorf("%v export does not name the person who overrode (or names the typed author)", f)
		}
		if f == pb.ExportFormat_EXPORT_FORMAT_JSON {
			var doc struct {
				Groups []struct {
					Grade struct {
						Override struct{ Author string }
					}
				}
			}
			json.Unmarshal(ex.Content, &doc)
			if len(doc.Groups) != 1 || doc.Groups[0].Grade.Override.Author != "Rosalind Achterberg" {
				t.Errorf("JSON export's override: %+v", doc.Groups)
			}
		}
	}

	// Revoking ends the assistant's open room stream with the reason, and
	// every later call.
	wctx, cancel := context.WithTimeout(ctx, 5*time.Second)
	defer cancel()
	ws, err := rpcpb.NewInstructorServiceClient(asst).WatchRoom(wctx, &pb.WatchRoomRequest{SessionId: magnetism.SessionId})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := ws.Recv(); err != nil {
		t.Fatal(err)
	}
	if _, err := rpcpb.NewStaffServiceClient(r.conn).RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: asstID}); err != nil {
		t.Fatal(err)
	}
	_, err = ws.Recv()
	if status.Code(err) != codes.Unauthenticated || !strings.Contains(err.Error(), "revoked") {
		t.Errorf("the revoked assistant's room stream ended with %v, want Unauthenticated saying revoked", err)
	}
	_, err = rpcpb.NewInstructorServiceClient(asst).ListSessions(ctx, &pb.ListSessionsRequest{})
	if status.Code(err) != codes.Unauthenticated || !strings.Contains(err.Error(), "Teo Vasquez-Lind") {
		t.Errorf("a call with the revoked key: %v, want Unauthenticated naming the person", err)
	}

	// A person may give themselves a new key; the old one stops.
	rot, err := rpcpb.NewStaffServiceClient(instr).RotateStaffKey(ctx, &pb.RotateStaffKeyRequest{StaffId: 1})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := rpcpb.NewStaffServiceClient(instr).WhoAmI(ctx, &pb.WhoAmIRequest{}); status.Code(err) != codes.Unauthenticated {
		t.Errorf("the replaced key still works: %v", err)
	}
	who, err := rpcpb.NewStaffServiceClient(dialAs(t, r, rot.Key)).WhoAmI(ctx, &pb.WhoAmIRequest{})
	if err != nil || who.Name != "Rosalind Achterberg" || len(who.Roles) != 1 || who.Roles[0].Role != instructor {
		t.Errorf("WhoAmI with the new key: %v, %v", who, err)
	}
}

// TestStaffRequestsChecked: bad accounts are refused field by field and
// nothing is stored; an instructor adds assistants to their own courses
// only, and a new session goes to their course.
func TestStaffRequestsChecked(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	admin := rpcpb.NewStaffServiceClient(r.conn)
	for _, tc := range []struct {
		req    *pb.AddStaffRequest
		fields []string
	}{
		{&pb.AddStaffRequest{}, []string{"name", "roles"}},
		{&pb.AddStaffRequest{Name: "Ann\nB", Roles: []*pb.CourseRole{{Course: "PHY 1", Role: instructor}}}, []string{"name"}},
		{&pb.AddStaffRequest{Name: "Ann B", Roles: []*pb.CourseRole{{Course: "", Role: instructor}, {Course: "PHY 2"}}}, []string{"roles[0].course", "roles[1].role"}},
		{&pb.AddStaffRequest{Name: "Ann B", Roles: []*pb.CourseRole{{Course: "PHY 2", Role: instructor}, {Course: "PHY 2", Role: assistant}}}, []string{"roles[1].course"}},
	} {
		_, err := admin.AddStaff(ctx, tc.req)
		got := fieldsOf(t, err)
		for _, f := range tc.fields {
			if !contains(got, f) {
				t.Errorf("AddStaff(%v): fields %v, want %s", tc.req, got, f)
			}
		}
	}
	if all, _ := r.db.StaffAccounts(); len(all) != 0 {
		t.Errorf("refused requests stored %d accounts", len(all))
	}
	_, key := addStaff(t, r, "Rosalind Achterberg", map[string]pb.StaffRole{"PHY 214": instructor})
	// A name is one person: adding it again adds roles to the account, and
	// gives no new key; a course it has a role in keeps that role.
	more, err := admin.AddStaff(ctx, &pb.AddStaffRequest{Name: "rosalind achterberg", Roles: []*pb.CourseRole{{Course: "PHY 1", Role: assistant}}})
	if err != nil || more.Key != "" || more.Staff.StaffId != 1 || len(more.Staff.Roles) != 2 {
		t.Errorf("the same name again: %v, %v; want account 1 with two roles and no key", more, err)
	}
	_, err = admin.AddStaff(ctx, &pb.AddStaffRequest{Name: "Rosalind Achterberg", Roles: []*pb.CourseRole{{Course: "PHY 214", Role: assistant}}})
	if got := fieldsOf(t, err); !contains(got, "roles[0].role") {
		t.Errorf("changing a role by adding the name again: %v, want a roles[0].role violation", err)
	}
	if who, err := rpcpb.NewStaffServiceClient(dialAs(t, r, key)).WhoAmI(ctx, &pb.WhoAmIRequest{}); err != nil || len(who.Roles) != 2 {
		t.Errorf("the person's key after a role was added: %v, %v; want it working, with both roles", who, err)
	}
	if all, _ := r.db.StaffAccounts(); len(all) != 1 {
		t.Errorf("%d accounts, want the one", len(all))
	}
	mine := rpcpb.NewStaffServiceClient(dialAs(t, r, key))
	for _, roles := range [][]*pb.CourseRole{{{Course: "PHY 214", Role: instructor}}, {{Course: "PHY 118", Role: assistant}}} {
		if _, err := mine.AddStaff(ctx, &pb.AddStaffRequest{Name: "Someone", Roles: roles}); status.Code(err) != codes.PermissionDenied {
			t.Errorf("instructor adds %v: %v, want PermissionDenied", roles, err)
		}
	}
	if _, err := mine.AddStaff(ctx, &pb.AddStaffRequest{Name: "Teo Vasquez-Lind", Roles: []*pb.CourseRole{{Course: "PHY 214", Role: assistant}}}); err != nil {
		t.Errorf("instructor adds an assistant to their course: %v", err)
	}
	res, err := rpcpb.NewInstructorServiceClient(dialAs(t, r, key)).CreateSession(ctx, &pb.CreateSessionRequest{Title: "Fields lab, section 3"})
	if err != nil || res.Session.Course != "PHY 214" {
		t.Errorf("a session by the instructor of one course: %v, %v; want course PHY 214", res, err)
	}
}

// TestServesUpgradedFile: a server on a file of schema 2 keeps its
// instructor key as the administrator's, and a staff account made on it
// sees the course its session was upgraded into.
func TestServesUpgradedFile(t *testing.T) {
	src, err := os.ReadFile(filepath.Join("..", "testdata", "store", "schema-v2.db"))
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "old.db")
	os.WriteFile(path, src, 0o600)
	db, err := store.Open(path, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	srv, err := New(Config{DB: db, Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	if srv.ShownKey() != "" {
		t.Error("the upgraded server made a new administrator's key")
	}
	l, _ := net.Listen("tcp", "127.0.0.1:0")
	go srv.Serve(l)
	defer srv.Shutdown(context.Background())
	r := &rig{addr: l.Addr().String(), db: db, srv: srv}
	r.conn = dialAs(t, r, "schema2-instructor-key")
	ctx := context.Background()
	who, err := rpcpb.NewStaffServiceClient(r.conn).WhoAmI(ctx, &pb.WhoAmIRequest{})
	if err != nil || !who.Administrator {
		t.Fatalf("the old instructor key: %v, %v; want the administrator", who, err)
	}
	_, key := addStaff(t, r, "Teo Vasquez-Lind", map[string]pb.StaffRole{"PHY 214 Fields lab, section 2": assistant})
	res, err := rpcpb.NewInstructorServiceClient(dialAs(t, r, key)).ListSessions(ctx, &pb.ListSessionsRequest{})
	if err != nil || len(res.Sessions) != 1 || res.Sessions[0].Course != "PHY 214 Fields lab, section 2" {
		t.Fatalf("the assistant lists %v, %v; want the one session of its course", res, err)
	}
	ex, err := rpcpb.NewInstructorServiceClient(dialAs(t, r, key)).Export(ctx, &pb.ExportRequest{SessionId: res.Sessions[0].SessionId, Format: pb.ExportFormat_EXPORT_FORMAT_JSON})
	if err != nil || !strings.Contains(string(ex.Content), "M. Okonkwo-Hale") {
		t.Errorf("the export of an upgraded session lost its override's author: %v", err)
	}
}

// TestJoinSeesBenchesSetLater: JoinBench answers from the cached list of a
// session's benches, and a bench added or relabelled afterwards is found.
func TestJoinSeesBenchesSetLater(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	join := func(label string) error {
		_, err := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: sess.JoinCode, BenchLabel: label})
		return err
	}
	if err := join("a1"); err != nil {
		t.Fatal(err)
	}
	if err := join("B7"); err == nil {
		t.Fatal("joined a bench that is not there")
	}
	relabel := forceBench("C1", 0, 0)
	relabel.BenchId = benches[0].BenchId
	if _, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: sess.SessionId, Benches: []*pb.Bench{forceBench("B7", 1, 0), relabel}}); err != nil {
		t.Fatal(err)
	}
	if err := join("B7"); err != nil {
		t.Errorf("a bench added after the first join: %v", err)
	}
	if err := join("C1"); err != nil {
		t.Errorf("a bench relabelled after the first join: %v", err)
	}
	if err := join("A1"); err == nil {
		t.Error("the old label of a relabelled bench still joins")
	}
}

// TestRemoveOneRole: an assistant who leaves one course keeps the others;
// their instructor in that course may remove that role only; the last
// role removed revokes the key.
func TestRemoveOneRole(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	for _, c := range []string{"PHY 214", "PHY 118"} {
		if _, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: c + " lab", Course: c}); err != nil {
			t.Fatal(err)
		}
	}
	_, instr := addStaff(t, r, "Rosalind Achterberg", map[string]pb.StaffRole{"PHY 214": instructor})
	teoID, teo := addStaff(t, r, "Teo Vasquez-Lind", map[string]pb.StaffRole{"PHY 214": assistant, "PHY 118": assistant})
	mine := rpcpb.NewStaffServiceClient(dialAs(t, r, instr))
	if _, err := mine.RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: teoID}); status.Code(err) != codes.PermissionDenied {
		t.Errorf("the instructor of one of his courses revokes his whole key: %v, want PermissionDenied", err)
	}
	if _, err := mine.RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: teoID, Course: "PHY 118"}); status.Code(err) != codes.PermissionDenied {
		t.Errorf("removing his role in a course she does not instruct: %v, want PermissionDenied", err)
	}
	if _, err := mine.RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: teoID, Course: "PHY 301"}); !contains(fieldsOf(t, err), "course") {
		t.Errorf("removing a role he does not have: %v, want a course violation", err)
	}
	res, err := mine.RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: teoID, Course: "PHY 214"})
	if err != nil || res.Staff.Revoked || len(res.Staff.Roles) != 1 || res.Staff.Roles[0].Course != "PHY 118" {
		t.Fatalf("removing his PHY 214 role: %v, %v; want PHY 118 left", res, err)
	}
	list, err := rpcpb.NewInstructorServiceClient(dialAs(t, r, teo)).ListSessions(ctx, &pb.ListSessionsRequest{})
	if err != nil || len(list.Sessions) != 1 || list.Sessions[0].Course != "PHY 118" {
		t.Errorf("his key lists %v, %v; want the PHY 118 session only", list, err)
	}
	res, err = rpcpb.NewStaffServiceClient(r.conn).RevokeStaff(ctx, &pb.RevokeStaffRequest{StaffId: teoID, Course: "PHY 118"})
	if err != nil || !res.Staff.Revoked {
		t.Errorf("removing his last role: %v, %v; want the key revoked", res, err)
	}
}
