package server

import (
	"context"
	"crypto/rand"
	"errors"
	"fmt"
	"strings"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/export"
	"example.com/fluxroom/internal/wire"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

type stationService struct {
	rpcpb.UnimplementedStationServiceServer
	s *Server
}

// JoinBench gives a station laptop its bench: the session's join code and the bench's label in, the
// bench, its experiment and a station token out. A closed session's code no longer works.
func (st stationService) JoinBench(ctx context.Context, req *pb.JoinBenchRequest) (*pb.JoinBenchResponse, error) {
	code := strings.ToUpper(strings.TrimSpace(req.GetJoinCode()))
	if code == "" {
		return nil, domain.Invalid("join_code", "is missing; the instructor's screen shows it")
	}
	sess, err := st.s.db.SessionByJoinCode(code)
	if errors.Is(err, store.ErrNotFound) {
		return nil, domain.Invalid("join_code", "no session has join code %q; check it on the instructor's screen", code)
	}
	if err != nil {
		return nil, err
	}
	if sess.Closed {
		return nil, domain.Invalid("join_code", "the session with join code %q is closed", code)
	}
	benches, err := st.s.sessionBenches(sess.ID)
	if err != nil {
		return nil, err
	}
	members := strings.TrimSpace(req.GetGroupMembers())
	if err := domain.ValidateMembers("group_members", members); err != nil {
		return nil, err
	}
	var labels []string
	for _, b := range benches {
		if strings.EqualFold(b.Label, strings.TrimSpace(req.GetBenchLabel())) {
			if members != "" && members != b.Members {
				if err := st.s.setMembers(sess.ID, b.ID, members); err != nil {
					return nil, err
				}
				b.Members = members
			}
			return &pb.JoinBenchResponse{SessionId: sess.ID, Bench: benchToPB(b), StationToken: st.s.auth.stationToken(sess.ID, b.ID)}, nil
		}
		labels = append(labels, b.Label)
	}
	return nil, domain.Invalid("bench_label", "no bench %q in this session; benches are %s", req.GetBenchLabel(), strings.Join(labels, ", "))
}

// SubmitReading stores one reading of the caller's bench and answers once it is on disk. The reading
// id is the client's: sending a reading again under its id stores nothing new and answers with the
// reading stored first (Duplicate). Bad values are refused field by field and nothing is stored; the
// room sees the reading when its judge next passes.
func (st stationService) SubmitReading(ctx context.Context, req *pb.SubmitReadingRequest) (*pb.SubmitReadingResponse, error) {
	if err := domain.ValidateReadingID("reading_id", req.GetReadingId()); err != nil {
		return nil, err
	}
	bench, err := st.s.bench(req.GetSessionId(), req.GetBenchId())
	if err != nil {
		return nil, err
	}
	values := wire.ValuesFromPB(req.GetValues())
	if err := domain.ValidateReading("values", bench, values); err != nil {
		return nil, err
	}
	if sup := req.GetSupersedes(); sup != "" {
		if err := st.s.checkSupersedes(req.GetSessionId(), req.GetBenchId(), req.GetReadingId(), sup); err != nil {
			return nil, err
		}
	}
	if closed, err := st.s.sessionClosed(req.GetSessionId()); err != nil {
		return nil, err
	} else if closed {
		return nil, status.Error(codes.FailedPrecondition, "the session is closed; it takes no more readings")
	}
	r := domain.Reading{ID: req.GetReadingId(), Values: values, ReceivedAt: st.s.now(), Supersedes: req.GetSupersedes()}
	if err := st.s.fail("received"); err != nil {
		return nil, err
	}
	if st.s.ackEarly(req.GetSessionId(), req.GetBenchId(), r) {
		return &pb.SubmitReadingResponse{Reading: readingWithValues(r, req.GetValues())}, nil
	}
	// AppendReading returns once bbolt has committed the transaction, which
	// fsyncs the file: only then is the reading acknowledged.
	stored, dup, err := st.s.db.AppendReading(req.GetSessionId(), req.GetBenchId(), r)
	if err != nil {
		return nil, err
	}
	if err := st.s.fail("committed"); err != nil {
		return nil, err
	}
	if dup {
		if !stored.Values.Equal(r.Values) || stored.Supersedes != r.Supersedes {
			// The id is the station's promise that this is the same
			// reading: other values under it are a second reading that
			// would be lost, or a first one silently replaced.
			return nil, alreadyStored(req.GetReadingId(), stored)
		}
		st.s.metrics.duplicates.Add(1)
	} else {
		st.s.metrics.readings.Add(1)
		if !st.s.skipJudging() {
			st.s.judged(req.GetSessionId(), req.GetBenchId(), stored)
		}
	}
	if err := st.s.fail("replying"); err != nil {
		return nil, err
	}
	// A duplicate's stored values equal the request's (checked above).
	return &pb.SubmitReadingResponse{Reading: readingWithValues(stored, req.GetValues()), Duplicate: dup}, nil
}

// GetBenchState is the caller's bench as its station may see it: the verdict and its reasons when the
// session shows them to stations, otherwise the count of readings, and always a safety caution.
func (st stationService) GetBenchState(ctx context.Context, req *pb.GetBenchStateRequest) (*pb.GetBenchStateResponse, error) {
	v, err := st.s.benchState(req.GetSessionId(), req.GetBenchId())
	if err != nil {
		return nil, err
	}
	sess := v.session
	out := &pb.GetBenchStateResponse{State: forStation(v.state, sess.StationsSeeVerdicts)}
	if p, err := export.ParsePolicy([]byte(sess.GradingPolicy)); err == nil {
		out.RequiredReadings = int32(p.RequiredReadings[v.state.GetBench().GetExperiment()])
	}
	if plot := plotToPB(v.judged.Plot); plot != nil {
		if !sess.StationsSeeVerdicts {
			// The group's own points, without what would tell the verdict.
			plot.Fit, plot.Theory, plot.BandLow, plot.BandHigh = nil, nil, nil, nil
		}
		out.Plot = plot
	}
	for _, r := range v.readings {
		out.Readings = append(out.Readings, readingToPB(r))
	}
	return out, nil
}

// forStation is what a bench's own laptop sees of its state: everything
// when the session allows it, otherwise its bench and progress only. An
// unsafe verdict and its caution are always shown: safety is not a grade.
func forStation(st *pb.BenchState, seeVerdicts bool) *pb.BenchState {
	if seeVerdicts || st.GetVerdict() == pb.Verdict_VERDICT_UNSAFE {
		return st
	}
	// A caution at a limit reaches the bench whatever the session shows.
	return &pb.BenchState{Bench: st.GetBench(), ReadingCount: st.GetReadingCount(), LastReadingAt: st.GetLastReadingAt(),
		ExperimentTitle: st.GetExperimentTitle(), VerdictLabel: "shown after class", Verdict: pb.Verdict_VERDICT_UNSPECIFIED,
		Caution: st.GetCaution()}
}

// ListExperiments describes every experiment: its constants, its reading values, their units and
// limits, for a station's form.
func (st stationService) ListExperiments(ctx context.Context, req *pb.ListExperimentsRequest) (*pb.ListExperimentsResponse, error) {
	return &pb.ListExperimentsResponse{Experiments: experimentsToPB()}, nil
}

// joinCodeAlphabet leaves out 0/O and 1/I/L, which are misread on a projector.
const joinCodeAlphabet = "23456789ABCDEFGHJKMNPQRSTUVWXYZ"

// joinCodeLength is how many characters a join code has.
const joinCodeLength = 6

func newJoinCode() string {
	b := make([]byte, joinCodeLength)
	rand.Read(b)
	for i := range b {
		b[i] = joinCodeAlphabet[int(b[i])%len(joinCodeAlphabet)]
	}
	return string(b)
}

// alreadyStored is the answer to a reading id reused with other values:
// AlreadyExists, naming the field and the values stored under it.
func alreadyStored(id string, stored domain.Reading) error {
	var vals []string
	for _, nq := range stored.Values { // sorted by name
		vals = append(vals, fmt.Sprintf("%s %g %s", nq.Name, nq.Value, nq.Unit))
	}
	reason := fmt.Sprintf("reading id %q is already stored (reading #%d: %s) with other values; a new reading needs a new id, and a correction names the reading it corrects in supersedes",
		id, stored.Sequence, strings.Join(vals, ", "))
	st := status.New(codes.AlreadyExists, "reading_id: "+reason)
	if d, err := st.WithDetails(&errdetails.BadRequest{FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: "reading_id", Description: reason}}}); err == nil {
		st = d
	}
	return st.Err()
}
