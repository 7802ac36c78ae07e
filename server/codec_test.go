package server

import (
	"testing"

	"google.golang.org/protobuf/proto"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// A sequenced event's bytes decode to the event with its sequence, as if
// the whole message had been encoded for that stream.
func TestSequencedEventEncoding(t *testing.T) {
	ev := &pb.WatchRoomResponse{Event: &pb.WatchRoomResponse_Bench{Bench: &pb.BenchState{
		Bench: &pb.Bench{BenchId: 7, Label: "C3"}, Verdict: pb.Verdict_VERDICT_CHECK, Reason: "slope 0.51 ± 0.02 N/A, theory 0.48",
		ReadingCount: 6, Diagnoses: []*pb.Diagnosis{{Code: "coil_force.sensor_not_zeroed"}}}}}
	re, err := newRoomEvent(ev)
	if err != nil {
		t.Fatal(err)
	}
	c := newCodec()
	for _, seq := range []uint64{1, 2, 127, 128, 1 << 40} {
		data, err := c.Marshal(sequenced{seq: seq, ev: re})
		if err != nil {
			t.Fatal(err)
		}
		var got pb.WatchRoomResponse
		if err := proto.Unmarshal(data.Materialize(), &got); err != nil {
			t.Fatal(err)
		}
		want := proto.Clone(ev).(*pb.WatchRoomResponse)
		want.Sequence = seq
		if !proto.Equal(&got, want) {
			t.Errorf("sequence %d: decoded %v, want %v", seq, &got, want)
		}
	}
	// Everything else goes through the protobuf codec unchanged.
	data, err := c.Marshal(ev)
	if err != nil {
		t.Fatal(err)
	}
	if b, _ := proto.Marshal(ev); string(data.Materialize()) != string(b) {
		t.Error("a plain message is not encoded as protobuf")
	}
}
