package server

import (
	"context"
	"fmt"
	"testing"
	"time"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// A room nobody watches leaves the memory after a quiet spell, and its judge
// stops; the next reading brings both back, judged with every reading the
// file holds.
func TestQuietRoomLeavesMemory(t *testing.T) {
	r := startRigWith(t, Config{RoomIdle: 60 * time.Millisecond})
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	sid, bid := sess.SessionId, benches[0].BenchId
	for i, I := range []float64{0, 1, 2} {
		if _, err := submit(ctx, r, sid, bid, fmt.Sprintf("q%d", i), I, 0.48*I); err != nil {
			t.Fatal(err)
		}
	}
	gone := func() bool {
		_, cached := r.srv.rooms.peek(sid)
		_, judging := r.srv.judges.Load(sid)
		return !cached && !judging
	}
	deadline := time.Now().Add(5 * time.Second)
	for !gone() && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	if !gone() {
		t.Fatal("the quiet room stayed in memory")
	}
	stream, err := r.instructor.WatchRoom(ctx, &pb.WatchRoomRequest{SessionId: sid})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := stream.Recv(); err != nil {
		t.Fatal(err)
	}
	if _, err := submit(ctx, r, sid, bid, "q3", 3, 1.44); err != nil {
		t.Fatal(err)
	}
	for {
		ev, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if b := ev.GetBench(); b.GetBench().GetBenchId() == bid {
			if b.ReadingCount != 4 {
				t.Errorf("after coming back the bench shows %d readings, want 4", b.ReadingCount)
			}
			break
		}
	}
	// Watched, the room stays however quiet it is.
	time.Sleep(200 * time.Millisecond)
	r.srv.checkStalls()
	if _, cached := r.srv.rooms.peek(sid); !cached {
		t.Error("a watched room left the memory")
	}
}
