package server

import (
	"context"
	"fmt"
	"slices"
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
	stream := watchPastSnapshot(t, r, sid)
	if _, err := submit(ctx, r, sid, bid, "q3", 3, 1.44); err != nil {
		t.Fatal(err)
	}
	for {
		ev, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if b := changedBench(ev, benchID(bid)); b != nil {
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

// A change that moves every bench of the room (here its tolerance) reaches a
// watcher as one message holding all their states, not one message each: a
// stream writes once per wake-up.
func TestRoomChangesComeInOneMessage(t *testing.T) {
	r := startRig(t)
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	stream := watchPastSnapshot(t, r, sess.SessionId)
	if _, err := r.instructor.UpdateSession(ctx, &pb.UpdateSessionRequest{SessionId: sess.SessionId,
		Tolerance: &pb.Tolerance{GoodPercent: 4, AcceptablePercent: 8}}); err != nil {
		t.Fatal(err)
	}
	ev, err := stream.Recv()
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, b := range ev.GetChanges().GetBenches() {
		got = append(got, b.GetBench().GetLabel())
	}
	if want := []string{benches[0].Label, benches[1].Label}; !slices.Equal(got, want) || ev.Sequence != 2 {
		t.Errorf("first event after the snapshot: sequence %d, benches %v; want sequence 2 with %v", ev.Sequence, got, want)
	}
}

// A room stream sends at most one message per WatchEvery: the first change
// after a quiet spell goes at once, and changes that come sooner wait and go
// together in the next message.
func TestRoomStreamPace(t *testing.T) {
	const every = 600 * time.Millisecond
	r := startRigWith(t, Config{WatchEvery: every})
	ctx := context.Background()
	sess, benches := setupRoom(t, r)
	stream := watchPastSnapshot(t, r, sess.SessionId)
	a1, a2 := benches[0].BenchId, benches[1].BenchId
	// Quiet for longer than the pace since the snapshot: A1's first
	// reading goes at once.
	time.Sleep(every)
	start := time.Now()
	if _, err := submit(ctx, r, sess.SessionId, a1, "a1-1", 1, 0.48); err != nil {
		t.Fatal(err)
	}
	ev, err := stream.Recv()
	if err != nil {
		t.Fatal(err)
	}
	if b := changedBench(ev, benchID(a1)); b == nil || time.Since(start) >= every {
		t.Fatalf("after a quiet spell, A1's reading came %v later in %v; want it at once", time.Since(start), ev)
	}
	// A2 and A1 again, right after: one message, not before the pace.
	if _, err := submit(ctx, r, sess.SessionId, a2, "a2-1", 1, 0.48); err != nil {
		t.Fatal(err)
	}
	if _, err := submit(ctx, r, sess.SessionId, a1, "a1-2", 2, 0.96); err != nil {
		t.Fatal(err)
	}
	var counts [2]int32
	for counts[0] < 2 || counts[1] < 1 {
		ev, err := stream.Recv()
		if err != nil {
			t.Fatal(err)
		}
		if ev.Sequence != 3 {
			t.Fatalf("A2's and A1's states came in more than one message (%d so far: %v)", ev.Sequence-2, counts)
		}
		for i, id := range []uint64{a1, a2} {
			if b := changedBench(ev, benchID(id)); b != nil {
				counts[i] = b.ReadingCount
			}
		}
	}
	if d := time.Since(start); d < every {
		t.Errorf("the second message came %v after the first change, sooner than the pace %v", d, every)
	}
}
