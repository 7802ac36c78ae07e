package server

import (
	"sort"

	"google.golang.org/protobuf/types/known/timestamppb"

	"example.com/fluxroom/domain"
	"example.com/fluxroom/internal/wire"
	pb "example.com/fluxroom/proto/fluxroompb"
)

func toleranceFromPB(t *pb.Tolerance) domain.Tolerance {
	return domain.Tolerance{ZConsistent: t.GetZConsistent(), ZOff: t.GetZOff(), GoodPercent: t.GetGoodPercent(), AcceptablePercent: t.GetAcceptablePercent()}
}

func sessionToPB(s domain.Session) *pb.Session {
	t := s.EffectiveTolerance()
	out := &pb.Session{SessionId: s.ID, Title: s.Title, JoinCode: s.JoinCode, StationsSeeVerdicts: s.StationsSeeVerdicts,
		GradingPolicyJson: s.GradingPolicy, Closed: s.Closed, Course: s.Course,
		Tolerance: &pb.Tolerance{ZConsistent: t.ZConsistent, ZOff: t.ZOff, GoodPercent: t.GoodPercent, AcceptablePercent: t.AcceptablePercent}}
	if !s.CreatedAt.IsZero() {
		out.CreatedAt = timestamppb.New(s.CreatedAt)
	}
	return out
}

func benchFromPB(b *pb.Bench) domain.Bench {
	return domain.Bench{ID: b.GetBenchId(), Label: b.GetLabel(), Row: int(b.GetRow()), Column: int(b.GetColumn()),
		Experiment: b.GetExperiment(), Constants: wire.QuantitiesFromPB(b.GetConstants()), Members: b.GetMembers()}
}

func benchToPB(b domain.Bench) *pb.Bench {
	return &pb.Bench{BenchId: b.ID, Label: b.Label, Row: int32(b.Row), Column: int32(b.Column),
		Experiment: b.Experiment, Constants: wire.QuantitiesToPB(b.Constants), Members: b.Members}
}

func readingToPB(r domain.Reading) *pb.Reading {
	return readingWithValues(r, wire.ValuesToPB(r.Values))
}

// readingWithValues is readingToPB with the values already in wire form: a
// submission's answer sends back the request's own, which are the stored
// reading's values as typed, without converting them twice.
func readingWithValues(r domain.Reading, values map[string]*pb.Quantity) *pb.Reading {
	out := &pb.Reading{ReadingId: r.ID, Values: values, Sequence: r.Sequence, Supersedes: r.Supersedes}
	if !r.ReceivedAt.IsZero() {
		out.ReceivedAt = timestamppb.New(r.ReceivedAt)
	}
	return out
}

var verdictToPB = map[domain.Verdict]pb.Verdict{
	domain.NeedData:   pb.Verdict_VERDICT_NEED_DATA,
	domain.Consistent: pb.Verdict_VERDICT_CONSISTENT,
	domain.Check:      pb.Verdict_VERDICT_CHECK,
	domain.Off:        pb.Verdict_VERDICT_OFF,
	domain.Unsafe:     pb.Verdict_VERDICT_UNSAFE,
	domain.Stalled:    pb.Verdict_VERDICT_STALLED,
}

func stateToPB(bench *pb.Bench, a domain.Assessment) *pb.BenchState {
	st := &pb.BenchState{
		Bench:             bench,
		Verdict:           verdictToPB[a.Verdict],
		VerdictLabel:      a.Verdict.Label(),
		Reason:            a.Reason,
		ReadingCount:      int32(a.ReadingCount),
		Z:                 a.Z,
		PercentDifference: a.PercentDiff,
		Caution:           a.Caution,
		ExperimentTitle:   a.ExperimentTitle,
		ResultName:        a.ResultName,
		Notes:             a.Notes,
		Breach:            a.Breach,
		Headline:          a.Headline,
		BreachReadingIds:  a.BreachReadingIDs,
	}
	// A bench is judged after every reading: the budget's items, and the
	// two results, are one allocation each.
	if len(a.Budget) > 0 {
		items := make([]pb.BudgetItem, len(a.Budget))
		st.Budget = make([]*pb.BudgetItem, len(a.Budget))
		for i, b := range a.Budget {
			items[i].Input, items[i].RelativeUncertainty, items[i].Share = b.Input, b.RelU, b.Share
			st.Budget[i] = &items[i]
		}
	}
	if a.ResultUnit != "" {
		q := make([]pb.Quantity, 2)
		q[0].Value, q[0].Uncertainty, q[0].Unit = a.Measured.Value, a.Measured.Uncertainty, a.ResultUnit
		q[1].Value, q[1].Uncertainty, q[1].Unit = a.Predicted.Value, a.Predicted.Uncertainty, a.ResultUnit
		st.Measured, st.Predicted = &q[0], &q[1]
	}
	if !a.LastReadingAt.IsZero() {
		st.LastReadingAt = timestamppb.New(a.LastReadingAt)
	}
	if len(a.Diagnoses) > 0 {
		ds := make([]pb.Diagnosis, len(a.Diagnoses))
		st.Diagnoses = make([]*pb.Diagnosis, len(a.Diagnoses))
		for i, d := range a.Diagnoses {
			x := &ds[i]
			x.Code, x.Cause, x.Evidence, x.Action, x.Alternatives = d.Code, d.Cause, d.Evidence, d.Action, d.Alternatives
			x.Level, x.ReadingId, x.Short = domain.LevelOf(d.Code).String(), d.ReadingID, d.Short
			st.Diagnoses[i] = x
		}
	}
	return st
}

func fitToPB(a domain.Assessment) *pb.Fit {
	f := a.Fit
	if f == nil {
		return nil
	}
	return &pb.Fit{Slope: f.Slope, SlopeUncertainty: f.SlopeSE, Intercept: f.Intercept,
		InterceptUncertainty: f.InterceptSE, Points: int32(f.N), RSquared: f.RSquared,
		SlopeUnit: a.ResultUnit, XName: a.FitX, YName: a.FitY}
}

// sortBenches orders benches by room position, front-left first.
func sortBenches(bs []domain.Bench) {
	sort.SliceStable(bs, func(i, j int) bool {
		if bs[i].Row != bs[j].Row {
			return bs[i].Row < bs[j].Row
		}
		return bs[i].Column < bs[j].Column
	})
}

func findingsToPB(fs []domain.RoomFinding) []*pb.RoomFinding {
	out := make([]*pb.RoomFinding, 0, len(fs))
	for _, f := range fs {
		out = append(out, &pb.RoomFinding{Code: f.Code, Experiment: f.Experiment, Message: f.Message, BenchIds: f.BenchIDs,
			MedianRatio: f.MedianRatio, Spread: f.Spread, Groups: int32(f.Groups)})
	}
	return out
}

func noteToPB(n domain.Note) *pb.Note {
	out := &pb.Note{BenchId: n.BenchID, Kind: n.Kind, Text: n.Text, Author: n.Author, Points: n.Points, PreviousPoints: n.PreviousPoints}
	if !n.At.IsZero() {
		out.At = timestamppb.New(n.At)
	}
	return out
}

func specsToPB(specs []domain.QuantitySpec) []*pb.QuantitySpec {
	out := make([]*pb.QuantitySpec, 0, len(specs))
	for _, s := range specs {
		out = append(out, &pb.QuantitySpec{Name: s.Name, Label: s.Label, Unit: s.Unit, Units: domain.UnitsFor(s.Dim),
			DefaultValue: s.Default, Optional: s.Optional})
	}
	return out
}

func experimentsToPB() []*pb.ExperimentSpec {
	var out []*pb.ExperimentSpec
	for _, id := range domain.ExperimentIDs() {
		e, _ := domain.LookupExperiment(id)
		out = append(out, &pb.ExperimentSpec{Id: e.ID, Title: e.Title, Constants: specsToPB(e.Constants),
			Values: specsToPB(e.Values), MinReadings: int32(e.MinReadings)})
	}
	return out
}

func plotToPB(p *domain.Plot) *pb.Plot {
	if p == nil {
		return nil
	}
	line := func(xs []domain.XY) []*pb.PlotPoint {
		out := make([]*pb.PlotPoint, len(xs))
		for i, v := range xs {
			out[i] = &pb.PlotPoint{X: v.X, Y: v.Y}
		}
		return out
	}
	out := &pb.Plot{XLabel: p.XLabel, YLabel: p.YLabel, Theory: line(p.Theory), Fit: line(p.Fit),
		BandLow: line(p.BandLow), BandHigh: line(p.BandHigh)}
	for _, pt := range p.Points {
		out.Points = append(out.Points, &pb.PlotPoint{X: pt.X, Y: pt.Y, YUncertainty: pt.UY, ReadingId: pt.ReadingID})
	}
	return out
}
