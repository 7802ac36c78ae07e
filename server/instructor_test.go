package server

import (
	"context"
	"fmt"
	"strings"
	"testing"

	pb "example.com/fluxroom/proto/fluxroompb"
)

func TestCorrectionsNotesAndStationView(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	sid, bid := sess.SessionId, benches[0].BenchId
	for i, I := range []float64{0, 1, 2, 3} {
		if _, err := submit(ctx, r, sid, bid, string(rune('a'+i)), I, 0.48*I+0.001*float64(i%2)); err != nil {
			t.Fatal(err)
		}
	}
	// A decimal slip at 4 A, then its correction.
	if _, err := submit(ctx, r, sid, bid, "slip", 4, 19.2); err != nil {
		t.Fatal(err)
	}
	_, err := r.station.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: bid, ReadingId: "fix", Supersedes: "slip",
		Values: map[string]*pb.Quantity{"current": q(4, "A"), "force": q(1.92, "N")}})
	if err != nil {
		t.Fatal(err)
	}
	if fix := stateNow(t, r, sid, bid); fix.ReadingCount != 5 || fix.Verdict != pb.Verdict_VERDICT_CONSISTENT {
		t.Errorf("after the correction: %d readings, %v (%s); want 5 counted and consistent", fix.ReadingCount, fix.Verdict, fix.Reason)
	}
	// Correcting a reading that is not there is bad input, and stores nothing.
	_, err = r.station.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: sid, BenchId: bid, ReadingId: "fix2", Supersedes: "nope",
		Values: map[string]*pb.Quantity{"current": q(4, "A"), "force": q(1.92, "N")}})
	if f := fieldsOf(t, err); !contains(f, "supersedes") {
		t.Errorf("violations %v, want supersedes", f)
	}

	if _, err := r.instructor.AddNote(ctx, &pb.AddNoteRequest{SessionId: sid, BenchId: bid, Text: "slip at 4 A, retaken", Author: "TA Ravel"}); err != nil {
		t.Fatal(err)
	}
	if _, err := r.instructor.AddNote(ctx, &pb.AddNoteRequest{SessionId: sid, BenchId: bid, Text: " "}); !contains(fieldsOf(t, err), "text") {
		t.Error("an empty note was not rejected on text")
	}
	d, err := r.instructor.GetBenchDetail(ctx, &pb.GetBenchDetailRequest{SessionId: sid, BenchId: bid})
	if err != nil {
		t.Fatal(err)
	}
	if len(d.Detail.Readings) != 6 || len(d.Detail.Superseded) != 1 || d.Detail.Superseded[0] != "slip" || len(d.Detail.Notes) != 1 {
		t.Errorf("detail: %d readings, superseded %v, %d notes; want 6, [slip], 1", len(d.Detail.Readings), d.Detail.Superseded, len(d.Detail.Notes))
	}

	// Stations see their verdict only when the session allows it.
	st, err := r.station.GetBenchState(ctx, &pb.GetBenchStateRequest{SessionId: sid, BenchId: bid})
	if err != nil {
		t.Fatal(err)
	}
	if st.State.Reason != "" || st.State.Verdict != pb.Verdict_VERDICT_UNSPECIFIED || len(st.Readings) != 6 {
		t.Errorf("station view before: verdict %v reason %q, %d readings; want hidden, 6 readings", st.State.Verdict, st.State.Reason, len(st.Readings))
	}
	if _, err := r.instructor.UpdateSession(ctx, &pb.UpdateSessionRequest{SessionId: sid, StationsSeeVerdicts: true,
		Tolerance: &pb.Tolerance{ZConsistent: 1, ZOff: 0.5}}); !contains(fieldsOf(t, err), "tolerance.z_off") {
		t.Error("z_off below z_consistent was not rejected")
	}
	if _, err := r.instructor.UpdateSession(ctx, &pb.UpdateSessionRequest{SessionId: sid, StationsSeeVerdicts: true}); err != nil {
		t.Fatal(err)
	}
	st, _ = r.station.GetBenchState(ctx, &pb.GetBenchStateRequest{SessionId: sid, BenchId: bid})
	if st.State.Verdict != pb.Verdict_VERDICT_CONSISTENT {
		t.Errorf("station view after: %v, want consistent", st.State.Verdict)
	}

	ex, err := r.station.ListExperiments(ctx, &pb.ListExperimentsRequest{})
	if err != nil || len(ex.Experiments) != 5 {
		t.Fatalf("ListExperiments = %d, %v; want 5", len(ex.GetExperiments()), err)
	}
}

func TestUnsafeAlertAcknowledged(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	sid, bid := sess.SessionId, benches[0].BenchId
	// 6 A through a coil rated 5 A.
	if _, err := submit(ctx, r, sid, bid, "hot", 6, 2.9); err != nil {
		t.Fatal(err)
	}
	if res := stateNow(t, r, sid, bid); res.Verdict != pb.Verdict_VERDICT_UNSAFE || res.Caution == "" || res.AlertAcknowledged {
		t.Fatalf("state = %v, caution %q, acknowledged %v; want unsafe with a caution, not acknowledged", res.Verdict, res.Caution, res.AlertAcknowledged)
	}
	if _, err := r.instructor.AcknowledgeAlert(ctx, &pb.AcknowledgeAlertRequest{SessionId: sid, BenchId: bid, Author: "instructor"}); err != nil {
		t.Fatal(err)
	}
	st, _ := r.station.GetBenchState(ctx, &pb.GetBenchStateRequest{SessionId: sid, BenchId: bid})
	if !st.State.AlertAcknowledged || st.State.Verdict != pb.Verdict_VERDICT_UNSAFE {
		t.Errorf("after acknowledging: %v acknowledged %v; want unsafe, acknowledged", st.State.Verdict, st.State.AlertAcknowledged)
	}
	// A new unsafe reading raises the alert again.
	submit(ctx, r, sid, bid, "hotter", 6.5, 3.1)
	if stateNow(t, r, sid, bid).AlertAcknowledged {
		t.Error("a later unsafe reading stayed acknowledged")
	}
}

func TestGradingExportAndOverrideAudit(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	sid, bid := sess.SessionId, benches[0].BenchId
	for i, I := range []float64{0, 1, 2, 3, 4, 5, 0.5, 1.5} {
		submit(ctx, r, sid, bid, fmt.Sprintf("g%d", i), I, 0.48*I+0.001*float64(i%3))
	}
	if _, err := r.instructor.SetGradingPolicy(ctx, &pb.SetGradingPolicyRequest{SessionId: sid, PolicyJson: `{"points": {"accuracy": "x"}}`}); !contains(fieldsOf(t, err), "policy_json.points.accuracy") {
		t.Errorf("a bad policy was not rejected on its field")
	}
	if _, err := r.instructor.SetGradingPolicy(ctx, &pb.SetGradingPolicyRequest{SessionId: sid, PolicyJson: `{"name": "PHY 142", "points": {"accuracy": 6}}`}); err != nil {
		t.Fatal(err)
	}
	if _, err := r.instructor.OverrideGrade(ctx, &pb.OverrideGradeRequest{SessionId: sid, BenchId: bid, Points: 99, Reason: "x"}); !contains(fieldsOf(t, err), "points") {
		t.Error("points above the maximum were not rejected")
	}
	if _, err := r.instructor.OverrideGrade(ctx, &pb.OverrideGradeRequest{SessionId: sid, BenchId: bid, Points: 7, Author: "instructor"}); !contains(fieldsOf(t, err), "reason") {
		t.Error("an override without a reason was not rejected")
	}
	o, err := r.instructor.OverrideGrade(ctx, &pb.OverrideGradeRequest{SessionId: sid, BenchId: bid, Points: 7, Reason: "late start, agreed", Author: "instructor"})
	if err != nil {
		t.Fatal(err)
	}
	if o.Note.PreviousPoints != 12 || o.Note.Points != 7 || o.Note.At == nil {
		t.Errorf("override audit = %+v, want 12 → 7 with a time", o.Note)
	}
	ex, err := r.instructor.Export(ctx, &pb.ExportRequest{SessionId: sid, Format: pb.ExportFormat_EXPORT_FORMAT_GRADEBOOK_CSV})
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(ex.Content), "late start, agreed") || !strings.HasSuffix(ex.Filename, "-gradebook.csv") {
		t.Errorf("export %s:\n%s", ex.Filename, ex.Content)
	}
	if _, err := r.instructor.Export(ctx, &pb.ExportRequest{SessionId: sid}); !contains(fieldsOf(t, err), "format") {
		t.Error("an export without a format was not rejected")
	}
}
