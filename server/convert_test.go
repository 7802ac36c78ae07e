package server

import (
	"testing"
	"time"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	"example.com/fluxroom/domain"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// Every field of a judged bench reaches its state message, each budget item
// and diagnosis in its own message, in order.
func TestStateToPBCarriesEveryField(t *testing.T) {
	at := time.Date(2026, 3, 9, 10, 14, 0, 0, time.UTC)
	bench := &pb.Bench{BenchId: 4, Label: "A4", Experiment: "coil_force"}
	for _, tc := range []struct {
		name string
		a    domain.Assessment
		want *pb.BenchState
	}{
		{"no data yet", domain.Assessment{Verdict: domain.NeedData, Reason: "2 of 5 readings", ReadingCount: 2},
			&pb.BenchState{Bench: bench, Verdict: pb.Verdict_VERDICT_NEED_DATA, VerdictLabel: domain.NeedData.Label(), Reason: "2 of 5 readings", ReadingCount: 2}},
		{"judged, with a budget and two diagnoses", domain.Assessment{
			Verdict: domain.Check, Reason: "slope off", ReadingCount: 8, LastReadingAt: at, Z: -2.4, PercentDiff: -9.5,
			Caution: "hot coil", ExperimentTitle: "Force on a coil", ResultName: "slope", Notes: []string{"n1"},
			Breach: "coil current", Headline: "slope low", BreachReadingIDs: []string{"r7"},
			ResultUnit: "N/A", Measured: domain.Measurement{Value: 0.41, Uncertainty: 0.02}, Predicted: domain.Measurement{Value: 0.45, Uncertainty: 0.01},
			Budget: []domain.BudgetItem{{Input: "gap_field", RelU: 0.03, Share: 0.7}, {Input: "slope", RelU: 0.02, Share: 0.3}},
			Diagnoses: []domain.Diagnosis{
				{Code: "coil_force.sensor_not_zeroed", Cause: "c1", Evidence: "e1", Action: "a1", Alternatives: []string{"coil_force.probe_tilted"}, Short: "zero skipped"},
				{Code: "coil_force.reading_outlier", Cause: "c2", Evidence: "e2", Action: "a2", ReadingID: "r5", Short: "one reading"},
			},
		}, &pb.BenchState{Bench: bench, Verdict: pb.Verdict_VERDICT_CHECK, VerdictLabel: domain.Check.Label(), Reason: "slope off", ReadingCount: 8,
			LastReadingAt: timestamppb.New(at), Z: -2.4, PercentDifference: -9.5, Caution: "hot coil", ExperimentTitle: "Force on a coil",
			ResultName: "slope", Notes: []string{"n1"}, Breach: "coil current", Headline: "slope low", BreachReadingIds: []string{"r7"},
			Measured:  &pb.Quantity{Value: 0.41, Uncertainty: 0.02, Unit: "N/A"},
			Predicted: &pb.Quantity{Value: 0.45, Uncertainty: 0.01, Unit: "N/A"},
			Budget:    []*pb.BudgetItem{{Input: "gap_field", RelativeUncertainty: 0.03, Share: 0.7}, {Input: "slope", RelativeUncertainty: 0.02, Share: 0.3}},
			Diagnoses: []*pb.Diagnosis{
				{Code: "coil_force.sensor_not_zeroed", Cause: "c1", Evidence: "e1", Action: "a1", Alternatives: []string{"coil_force.probe_tilted"},
					Level: domain.LevelOf("coil_force.sensor_not_zeroed").String(), Short: "zero skipped"},
				{Code: "coil_force.reading_outlier", Cause: "c2", Evidence: "e2", Action: "a2", ReadingId: "r5",
					Level: domain.LevelOf("coil_force.reading_outlier").String(), Short: "one reading"},
			}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			if got := stateToPB(bench, tc.a); !proto.Equal(got, tc.want) {
				t.Errorf("got  %v\nwant %v", got, tc.want)
			}
		})
	}
}
