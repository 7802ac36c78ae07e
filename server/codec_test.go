package server

import (
	"testing"

	"google.golang.org/protobuf/proto"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// A stream's message of waiting events decodes to one RoomChanges holding
// every one of them, with the stream's sequence, as if the whole message
// had been encoded for that stream.
func TestSequencedEventsEncoding(t *testing.T) {
	c3 := &pb.BenchState{Bench: &pb.Bench{BenchId: 7, Label: "C3"}, Verdict: pb.Verdict_VERDICT_CHECK,
		Reason: "slope 0.51 ± 0.02 N/A, theory 0.48", ReadingCount: 6, Diagnoses: []*pb.Diagnosis{{Code: "coil_force.sensor_not_zeroed"}}}
	c4 := &pb.BenchState{Bench: &pb.Bench{BenchId: 8, Label: "C4"}, Verdict: pb.Verdict_VERDICT_CONSISTENT, ReadingCount: 9}
	findings := &pb.RoomFindings{Findings: []*pb.RoomFinding{{Code: "room.shared_cause", BenchIds: []uint64{7, 8}, MedianRatio: 0.5}}}
	events := func(t *testing.T, states []*pb.BenchState, f *pb.RoomFindings) []*roomEvent {
		var evs []*roomEvent
		for _, st := range states {
			re, err := benchChanged(st)
			if err != nil {
				t.Fatal(err)
			}
			evs = append(evs, re)
		}
		if f != nil {
			re, err := findingsChanged(f)
			if err != nil {
				t.Fatal(err)
			}
			evs = append(evs, re)
		}
		return evs
	}
	c := newCodec()
	for _, tc := range []struct {
		name     string
		benches  []*pb.BenchState
		findings *pb.RoomFindings
	}{
		{"one bench", []*pb.BenchState{c3}, nil},
		{"findings alone", nil, findings},
		{"two benches and the findings", []*pb.BenchState{c3, c4}, findings},
	} {
		for _, seq := range []uint64{1, 2, 127, 128, 1 << 40} {
			data, err := c.Marshal(sequenced{seq: seq, evs: events(t, tc.benches, tc.findings)})
			if err != nil {
				t.Fatal(err)
			}
			var got pb.WatchRoomResponse
			if err := proto.Unmarshal(data.Materialize(), &got); err != nil {
				t.Fatal(err)
			}
			want := &pb.WatchRoomResponse{Sequence: seq, Event: &pb.WatchRoomResponse_Changes{
				Changes: &pb.RoomChanges{Benches: tc.benches, Findings: tc.findings}}}
			if !proto.Equal(&got, want) {
				t.Errorf("%s, sequence %d: decoded %v, want %v", tc.name, seq, &got, want)
			}
		}
	}
	// Everything else goes through the protobuf codec unchanged.
	ev := &pb.WatchRoomResponse{Sequence: 1, Event: &pb.WatchRoomResponse_Snapshot{Snapshot: &pb.RoomSnapshot{Benches: []*pb.BenchState{c3}}}}
	data, err := c.Marshal(ev)
	if err != nil {
		t.Fatal(err)
	}
	if b, _ := proto.Marshal(ev); string(data.Materialize()) != string(b) {
		t.Error("a plain message is not encoded as protobuf")
	}
}
