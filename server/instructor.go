package server

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"slices"
	"sort"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/export"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

type instructorService struct {
	rpcpb.UnimplementedInstructorServiceServer
	s *Server
}

// CreateSession opens a lab section of a course with its title, tolerance and whether stations see
// their verdicts, and makes its join code. An instructor of one course may leave the course out; the
// administrator's key defaults it to the title.
func (in instructorService) CreateSession(ctx context.Context, req *pb.CreateSessionRequest) (*pb.CreateSessionResponse, error) {
	c, _ := callerOf(ctx)
	title := strings.TrimSpace(req.GetTitle())
	if err := domain.ValidateTitle("title", title); err != nil {
		return nil, err
	}
	course := strings.TrimSpace(req.GetCourse())
	if course == "" {
		mine, all := c.courses(domain.ActSetUp)
		switch {
		case all:
			course = title
		case len(mine) == 1:
			course = mine[0]
		case len(mine) == 0:
			return nil, status.Errorf(codes.PermissionDenied, "%s is an instructor of no course, and only instructors may %s", c.name(), domain.ActSetUp)
		default:
			return nil, domain.Invalid("course", "name the course: %s instructs %s", c.name(), strings.Join(mine, ", "))
		}
	}
	if err := domain.ValidateCourse("course", course); err != nil {
		return nil, err
	}
	if err := c.allows(domain.ActSetUp, course); err != nil {
		return nil, err
	}
	tol := toleranceFromPB(req.GetTolerance())
	if err := domain.ValidateTolerance("tolerance", tol); err != nil {
		return nil, err
	}
	created := in.s.auditNote(ctx, 0, domain.NoteKindSessionEdited, fmt.Sprintf("created the session %q in course %q", title, course))
	for range 5 {
		s, err := in.s.db.CreateSession(domain.Session{Title: title, Course: course, JoinCode: newJoinCode(), CreatedAt: in.s.now(),
			Tolerance: tol, StationsSeeVerdicts: req.GetStationsSeeVerdicts()}, created)
		if errors.Is(err, store.ErrConflict) {
			continue // a join code clash: draw another
		}
		if err != nil {
			return nil, err
		}
		return &pb.CreateSessionResponse{Session: sessionToPB(s)}, nil
	}
	return nil, errors.New("server: no free join code after 5 draws")
}

// ListSessions lists the sessions of the caller's courses (every session for the administrator).
func (in instructorService) ListSessions(ctx context.Context, req *pb.ListSessionsRequest) (*pb.ListSessionsResponse, error) {
	c, _ := callerOf(ctx)
	ss, err := in.s.db.Sessions()
	if err != nil {
		return nil, err
	}
	out := &pb.ListSessionsResponse{}
	for _, s := range ss {
		if c.allows(domain.ActWatch, s.Course) == nil {
			out.Sessions = append(out.Sessions, sessionToPB(s))
		}
	}
	return out, nil
}

// SetBenches sets a session's benches: labels, places in the room, experiments and their constants. A
// bench named by its id is changed in place and keeps its readings; every bad field is named at once
// and nothing is written.
func (in instructorService) SetBenches(ctx context.Context, req *pb.SetBenchesRequest) (*pb.SetBenchesResponse, error) {
	existing, err := in.s.db.Benches(req.GetSessionId())
	if errors.Is(err, store.ErrNotFound) {
		return nil, domain.Invalid("session_id", "no session %d", req.GetSessionId())
	}
	if err != nil {
		return nil, err
	}
	var vs []domain.FieldViolation
	add := func(err error) {
		var ve *domain.ValidationError
		if errors.As(err, &ve) {
			vs = append(vs, ve.Violations...)
		}
	}
	known := map[uint64]bool{}
	final := map[uint64]string{} // bench id → label once the request applies
	for _, b := range existing {
		known[b.ID] = true
		final[b.ID] = b.Label
	}
	labels := map[string]string{} // label → the request field that claims it
	benches := make([]domain.Bench, 0, len(req.GetBenches()))
	for i, pbb := range req.GetBenches() {
		field := fmt.Sprintf("benches[%d]", i)
		b, err := domain.ValidateBench(field, benchFromPB(pbb))
		add(err)
		if b.ID != 0 {
			if !known[b.ID] {
				vs = append(vs, domain.FieldViolation{Field: field + ".bench_id", Reason: fmt.Sprintf("no bench %d in session %d", b.ID, req.GetSessionId())})
			}
			final[b.ID] = b.Label
		}
		if other, dup := labels[b.Label]; dup {
			vs = append(vs, domain.FieldViolation{Field: field + ".label", Reason: fmt.Sprintf("label %q is also used by %s", b.Label, other)})
		}
		labels[b.Label] = field
		benches = append(benches, b)
	}
	for i, b := range benches {
		for id, label := range final {
			if label == b.Label && id != b.ID {
				vs = append(vs, domain.FieldViolation{Field: fmt.Sprintf("benches[%d].label", i), Reason: fmt.Sprintf("label %q is already used by bench %d", label, id)})
			}
		}
	}
	if len(vs) > 0 {
		return nil, &domain.ValidationError{Violations: vs}
	}
	set := make([]string, 0, len(benches))
	for _, b := range benches {
		set = append(set, b.Label)
	}
	all, err := in.s.db.PutBenches(req.GetSessionId(), benches,
		in.s.auditNote(ctx, 0, domain.NoteKindBenchesSet, fmt.Sprintf("set up %d bench(es): %s", len(benches), strings.Join(set, ", "))))
	in.s.benches.forget(req.GetSessionId())
	if err != nil {
		return nil, err
	}
	sortBenches(all)
	out := &pb.SetBenchesResponse{}
	for _, b := range all {
		out.Benches = append(out.Benches, benchToPB(b))
	}
	// The room judged once and published once, not bench by bench.
	if err := in.s.rejudgeRoom(req.GetSessionId()); err != nil {
		return nil, err
	}
	return out, nil
}

// WatchRoom streams a session's room: a snapshot of every bench first, then the changes of benches'
// states and of the room's findings, numbered; a slow watcher skips to the newest state of a bench.
func (in instructorService) WatchRoom(req *pb.WatchRoomRequest, stream rpcpb.InstructorService_WatchRoomServer) error {
	s := in.s
	id := req.GetSessionId()
	sess, err := s.db.Session(id)
	if errors.Is(err, store.ErrNotFound) {
		return domain.Invalid("session_id", "no session %d", id)
	}
	if err != nil {
		return err
	}
	// A stream's request arrives after authorize ran: its course is
	// checked here.
	c, _ := callerOf(stream.Context())
	if err := c.allows(domain.ActWatch, sess.Course); err != nil {
		return err
	}
	// Subscribe before the snapshot so no change between the two is missed;
	// a change already in the snapshot may arrive again, which is harmless.
	w := s.hub.subscribe(id)
	defer s.hub.unsubscribe(id, w)
	snap, err := s.snapshot(sess)
	if err != nil {
		return err
	}
	seq := uint64(1)
	if err := stream.Send(&pb.WatchRoomResponse{Sequence: seq, Event: &pb.WatchRoomResponse_Snapshot{Snapshot: snap}}); err != nil {
		return err
	}
	sent := time.Now()
	pace := time.NewTimer(0)
	defer pace.Stop()
	for {
		if err := awaitWatching(stream, w, w.ready); err != nil {
			return err
		}
		// At most one message per watchEvery: what changes meanwhile
		// waits and goes in the same message.
		if wait := s.watchEvery - time.Since(sent); wait > 0 {
			pace.Reset(wait)
			if err := awaitWatching(stream, w, pace.C); err != nil {
				return err
			}
		}
		evs := w.take()
		if len(evs) == 0 {
			continue
		}
		seq++
		if err := stream.SendMsg(sequenced{seq: seq, evs: evs}); err != nil {
			return err
		}
		sent = time.Now()
	}
}

// awaitWatching waits for ch, unless the room stream ends first or the hub
// drops its watcher: then it says why.
func awaitWatching[T any](stream grpc.ServerStream, w *watcher, ch <-chan T) error {
	select {
	case <-stream.Context().Done():
		return streamEnded(stream.Context())
	case <-w.gone:
		return status.Error(codes.Unavailable, "room stream ended (server stopping or watcher too slow); reconnect for a fresh snapshot")
	case <-ch:
		return nil
	}
}

// GetBenchDetail is everything known about one bench: its judged state, readings (corrections kept),
// fit, plot and notes.
func (in instructorService) GetBenchDetail(ctx context.Context, req *pb.GetBenchDetailRequest) (*pb.GetBenchDetailResponse, error) {
	v, err := in.s.benchState(req.GetSessionId(), req.GetBenchId())
	if err != nil {
		return nil, err
	}
	d := &pb.BenchDetail{State: v.state, Fit: fitToPB(v.judged), Plot: plotToPB(v.judged.Plot)}
	for _, r := range v.readings {
		d.Readings = append(d.Readings, readingToPB(r))
	}
	for id := range domain.Superseded(v.readings) {
		d.Superseded = append(d.Superseded, id)
	}
	sort.Strings(d.Superseded)
	notes, err := in.s.db.Notes(req.GetSessionId())
	if err != nil {
		return nil, err
	}
	for _, n := range notes {
		if n.BenchID == req.GetBenchId() {
			d.Notes = append(d.Notes, noteToPB(n))
		}
	}
	return &pb.GetBenchDetailResponse{Detail: d}, nil
}

// UpdateSession changes a session's title, tolerance or whether stations see their verdicts, and
// judges its room again.
func (in instructorService) UpdateSession(ctx context.Context, req *pb.UpdateSessionRequest) (*pb.UpdateSessionResponse, error) {
	sess, err := in.s.session(req.GetSessionId())
	if err != nil {
		return nil, err
	}
	if t := strings.TrimSpace(req.GetTitle()); t != "" {
		if err := domain.ValidateTitle("title", t); err != nil {
			return nil, err
		}
		sess.Title = t
	}
	sess.Tolerance = toleranceFromPB(req.GetTolerance())
	if err := domain.ValidateTolerance("tolerance", sess.Tolerance); err != nil {
		return nil, err
	}
	sess.StationsSeeVerdicts = req.GetStationsSeeVerdicts()
	t := sess.EffectiveTolerance()
	sess, err = in.s.db.UpdateSession(sess, in.s.auditNote(ctx, 0, domain.NoteKindSessionEdited,
		fmt.Sprintf("title %q; tolerance |z| ≤ %g consistent, > %g off, %g %% good, %g %% acceptable; stations see verdicts: %v",
			sess.Title, t.ZConsistent, t.ZOff, t.GoodPercent, t.AcceptablePercent, sess.StationsSeeVerdicts)))
	if err != nil {
		return nil, err
	}
	if err := in.s.rejudgeRoom(sess.ID); err != nil {
		return nil, err
	}
	return &pb.UpdateSessionResponse{Session: sessionToPB(sess)}, nil
}

// SetGradingPolicy sets a session's grading policy from its JSON, checked field by field.
func (in instructorService) SetGradingPolicy(ctx context.Context, req *pb.SetGradingPolicyRequest) (*pb.SetGradingPolicyResponse, error) {
	sess, err := in.s.session(req.GetSessionId())
	if err != nil {
		return nil, err
	}
	p, err := export.ParsePolicy([]byte(req.GetPolicyJson()))
	if err != nil {
		return nil, prefixFields(err, "policy_json.")
	}
	sess.GradingPolicy = strings.TrimSpace(req.GetPolicyJson())
	what := "set the default grading policy"
	if sess.GradingPolicy != "" {
		what = fmt.Sprintf("set the grading policy %q", p.Name)
	}
	if sess, err = in.s.db.UpdateSession(sess, in.s.auditNote(ctx, 0, domain.NoteKindPolicySet, what)); err != nil {
		return nil, err
	}
	// A quiet bench is done or stalled by the policy's required readings.
	if err := in.s.rejudgeRoom(sess.ID); err != nil {
		return nil, err
	}
	return &pb.SetGradingPolicyResponse{Session: sessionToPB(sess)}, nil
}

// OverrideGrade sets a bench's grade by hand, with the reason and the previous points kept in the
// audit log.
func (in instructorService) OverrideGrade(ctx context.Context, req *pb.OverrideGradeRequest) (*pb.OverrideGradeResponse, error) {
	ex, err := in.s.graded(req.GetSessionId())
	if err != nil {
		return nil, err
	}
	var row *domain.GradeRow
	for i := range ex.Rows {
		if ex.Rows[i].Bench.ID == req.GetBenchId() {
			row = &ex.Rows[i]
		}
	}
	if row == nil {
		return nil, domain.Invalid("bench_id", "no bench %d in session %d", req.GetBenchId(), req.GetSessionId())
	}
	o := domain.Override{BenchID: req.GetBenchId(), Points: req.GetPoints(), Reason: strings.TrimSpace(req.GetReason()),
		At: in.s.now(), Previous: row.Grade.Final}
	if err := domain.ValidateOverride(o, row.Grade.Max); err != nil {
		return nil, err
	}
	n := domain.Note{BenchID: o.BenchID, Kind: domain.NoteKindGradeOverride, Text: o.Reason, At: o.At,
		Points: o.Points, PreviousPoints: o.Previous}
	note, err := in.s.note(ctx, req.GetSessionId(), n)
	if err != nil {
		return nil, err
	}
	return &pb.OverrideGradeResponse{Note: note}, nil
}

var exportFormats = map[pb.ExportFormat]export.Format{
	pb.ExportFormat_EXPORT_FORMAT_GRADEBOOK_CSV: export.Gradebook,
	pb.ExportFormat_EXPORT_FORMAT_READINGS_CSV:  export.Readings,
	pb.ExportFormat_EXPORT_FORMAT_JSON:          export.JSON,
	pb.ExportFormat_EXPORT_FORMAT_HTML:          export.HTML,
}

// Export writes a session's graded results as the gradebook CSV, the readings CSV, JSON or the HTML
// report.
func (in instructorService) Export(ctx context.Context, req *pb.ExportRequest) (*pb.ExportResponse, error) {
	f, ok := exportFormats[req.GetFormat()]
	if !ok {
		return nil, domain.Invalid("format", "choose one of GRADEBOOK_CSV, READINGS_CSV, JSON, HTML")
	}
	ex, err := in.s.graded(req.GetSessionId())
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	name, ctype, err := export.Write(&buf, ex, f)
	if err != nil {
		return nil, err
	}
	return &pb.ExportResponse{Filename: name, ContentType: ctype, Content: buf.Bytes()}, nil
}

// chunkWriter sends what it is given as BackupChunks.
type chunkWriter struct {
	stream rpcpb.InstructorService_BackupServer
	total  int64
	first  bool
}

func (c *chunkWriter) Write(p []byte) (int, error) {
	const max = 256 << 10
	for off := 0; off < len(p); off += max {
		end := min(off+max, len(p))
		ch := &pb.BackupChunk{Data: p[off:end]}
		if c.first {
			ch.TotalBytes, c.first = c.total, false
		}
		if err := c.stream.Send(ch); err != nil {
			return off, err
		}
	}
	return len(p), nil
}

// Backup streams a consistent copy of the database file: the whole file for the administrator, a
// file of only their courses' sessions for an instructor.
func (in instructorService) Backup(req *pb.BackupRequest, stream rpcpb.InstructorService_BackupServer) error {
	c, _ := callerOf(stream.Context())
	w := &chunkWriter{stream: stream, first: true}
	bw := bufio.NewWriterSize(w, 256<<10)
	size := func(n int64) { w.total = n }
	mine, all := c.courses(domain.ActBackup)
	if all {
		if _, err := in.s.db.Backup(bw, size); err != nil {
			return err
		}
		return bw.Flush()
	}
	if len(mine) == 0 {
		return status.Errorf(codes.PermissionDenied, "%s is an instructor of no course, and only instructors and the administrator may %s", c.name(), domain.ActBackup)
	}
	ss, err := in.s.db.Sessions()
	if err != nil {
		return err
	}
	var ids []uint64
	for _, s := range ss {
		if slices.Contains(mine, s.Course) {
			ids = append(ids, s.ID)
		}
	}
	if _, err := in.s.db.BackupSessions(bw, ids, size); err != nil {
		return err
	}
	return bw.Flush()
}

// prefixFields puts prefix before every field of a validation error.
func prefixFields(err error, prefix string) error {
	var ve *domain.ValidationError
	if !errors.As(err, &ve) {
		return err
	}
	out := &domain.ValidationError{}
	for _, v := range ve.Violations {
		out.Violations = append(out.Violations, domain.FieldViolation{Field: prefix + v.Field, Reason: v.Reason})
	}
	return out
}

// CloseSession ends a session: its join code stops working and it takes no more readings; everything
// stored stays.
func (in instructorService) CloseSession(ctx context.Context, req *pb.CloseSessionRequest) (*pb.CloseSessionResponse, error) {
	sess, err := in.s.session(req.GetSessionId())
	if err != nil {
		return nil, err
	}
	sess.Closed = true
	if sess, err = in.s.db.UpdateSession(sess, in.s.auditNote(ctx, 0, domain.NoteKindClosed, "closed the session")); err != nil {
		return nil, err
	}
	in.s.closed.Store(sess.ID, true)
	return &pb.CloseSessionResponse{Session: sessionToPB(sess)}, nil
}

// AddNote adds an instructor's timestamped note to a bench.
func (in instructorService) AddNote(ctx context.Context, req *pb.AddNoteRequest) (*pb.AddNoteResponse, error) {
	n := domain.Note{BenchID: req.GetBenchId(), Kind: domain.NoteKindNote, Text: strings.TrimSpace(req.GetText()), At: in.s.now()}
	note, err := in.s.note(ctx, req.GetSessionId(), n)
	if err != nil {
		return nil, err
	}
	return &pb.AddNoteResponse{Note: note}, nil
}

// AcknowledgeAlert records that an instructor saw a bench's unsafe alert, as a note by its author.
func (in instructorService) AcknowledgeAlert(ctx context.Context, req *pb.AcknowledgeAlertRequest) (*pb.AcknowledgeAlertResponse, error) {
	n := domain.Note{BenchID: req.GetBenchId(), Kind: domain.NoteKindAcknowledged, Text: "unsafe alert acknowledged", At: in.s.now()}
	note, err := in.s.note(ctx, req.GetSessionId(), n)
	if err != nil {
		return nil, err
	}
	return &pb.AcknowledgeAlertResponse{Note: note}, nil
}

// SetGroupMembers sets the names of the group at a bench (one line, as the
// group would type them), for the gradebook's members column; the room
// shows them at once.
func (in instructorService) SetGroupMembers(ctx context.Context, req *pb.SetGroupMembersRequest) (*pb.SetGroupMembersResponse, error) {
	members := strings.TrimSpace(req.GetMembers())
	if err := domain.ValidateMembers("members", members); err != nil {
		return nil, err
	}
	b, err := in.s.bench(req.GetSessionId(), req.GetBenchId())
	if err != nil {
		return nil, err
	}
	if err := in.s.setMembers(req.GetSessionId(), b.ID, members,
		in.s.auditNote(ctx, b.ID, domain.NoteKindMembersSet, fmt.Sprintf("group members: %q", members))); err != nil {
		return nil, err
	}
	b.Members = members
	return &pb.SetGroupMembersResponse{Bench: benchToPB(b)}, nil
}
