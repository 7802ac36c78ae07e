package server

import (
	"fmt"
	"testing"

	"github.com/google/go-cmp/cmp"
	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/domain"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// benchState is a bench's state at a reading count.
func benchState(benchID uint64, count int32) *pb.BenchState {
	return &pb.BenchState{Bench: &pb.Bench{BenchId: benchID}, ReadingCount: count}
}

// benchEv is a bench's state at a reading count, as the judge publishes it.
func benchEv(t *testing.T, benchID uint64, count int32) *roomEvent {
	t.Helper()
	re, err := benchChanged(benchState(benchID, count))
	if err != nil {
		t.Fatal(err)
	}
	return re
}

func findingsEv(t *testing.T, n int) *roomEvent {
	t.Helper()
	fs := make([]*pb.RoomFinding, n)
	for i := range fs {
		fs[i] = &pb.RoomFinding{Code: fmt.Sprintf("room.f%d", i)}
	}
	re, err := findingsChanged(&pb.RoomFindings{Findings: fs})
	if err != nil {
		t.Fatal(err)
	}
	return re
}

// label names a queued event for comparison: "b<bench>@<count>" or
// "findings<n>".
func label(t *testing.T, ev *roomEvent) string {
	t.Helper()
	var ch pb.RoomChanges
	if err := proto.Unmarshal(ev.body, &ch); err != nil {
		t.Fatal(err)
	}
	if bs := ch.GetBenches(); len(bs) == 1 && ch.Findings == nil {
		return fmt.Sprintf("b%d@%d", bs[0].GetBench().GetBenchId(), bs[0].GetReadingCount())
	}
	if len(ch.GetBenches()) == 0 && ch.Findings != nil {
		return fmt.Sprintf("findings%d", len(ch.GetFindings().GetFindings()))
	}
	t.Fatalf("an event of %d benches and findings %v", len(ch.GetBenches()), ch.Findings)
	return ""
}

// A watcher that has not been sent its events yet gets each bench's latest
// state and the latest findings, in the order they first changed; events
// pushed after a take come in the next one.
func TestWatcherSendsLatestStates(t *testing.T) {
	for _, tc := range []struct {
		name   string
		pushes []func(t *testing.T) *roomEvent
		want   []string
	}{
		{"one bench, three readings", []func(*testing.T) *roomEvent{
			func(t *testing.T) *roomEvent { return benchEv(t, 4, 1) },
			func(t *testing.T) *roomEvent { return benchEv(t, 4, 2) },
			func(t *testing.T) *roomEvent { return benchEv(t, 4, 3) },
		}, []string{"b4@3"}},
		{"benches keep their first places", []func(*testing.T) *roomEvent{
			func(t *testing.T) *roomEvent { return benchEv(t, 1, 1) },
			func(t *testing.T) *roomEvent { return benchEv(t, 2, 1) },
			func(t *testing.T) *roomEvent { return findingsEv(t, 1) },
			func(t *testing.T) *roomEvent { return benchEv(t, 1, 2) },
			func(t *testing.T) *roomEvent { return findingsEv(t, 2) },
			func(t *testing.T) *roomEvent { return benchEv(t, 3, 1) },
		}, []string{"b1@2", "b2@1", "findings2", "b3@1"}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			w := newWatcher()
			for _, p := range tc.pushes {
				if !w.push(p(t)) {
					t.Fatal("push refused")
				}
			}
			select {
			case <-w.ready:
			default:
				t.Fatal("events waiting, and ready holds no token")
			}
			var got []string
			for _, ev := range w.take() {
				got = append(got, label(t, ev))
			}
			if diff := cmp.Diff(tc.want, got); diff != "" {
				t.Errorf("sent (-want +got):\n%s", diff)
			}
			if rest := w.take(); len(rest) != 0 {
				t.Errorf("a second take got %d events", len(rest))
			}
			// After a take, a bench's next state is news again.
			w.push(benchEv(t, 1, 9))
			if got := w.take(); len(got) != 1 || label(t, got[0]) != "b1@9" {
				t.Errorf("after a take, got %d events", len(got))
			}
		})
	}
}

// More distinct states waiting than watcherBuffer: the watcher is too far
// behind to keep, and the hub drops it so it starts again from a snapshot.
func TestHubDropsAWatcherTooFarBehind(t *testing.T) {
	h := newHub()
	w := h.subscribe(7)
	for b := uint64(1); b <= watcherBuffer; b++ {
		h.publishBenches(7, []*pb.BenchState{benchState(b, 1)})
	}
	select {
	case <-w.gone:
		t.Fatalf("dropped with %d benches waiting, the bound", watcherBuffer)
	default:
	}
	h.publishBenches(7, []*pb.BenchState{benchState(1, 2)}) // replaces a waiting state: still kept
	select {
	case <-w.gone:
		t.Fatal("dropped for a state that replaced a waiting one")
	default:
	}
	h.publishBenches(7, []*pb.BenchState{benchState(watcherBuffer+1, 1)})
	select {
	case <-w.gone:
	default:
		t.Fatalf("kept with %d distinct states waiting", watcherBuffer+1)
	}
	if n := h.watchersOf(7); n != 0 {
		t.Errorf("the dropped watcher is still subscribed (%d)", n)
	}
}

// A change to a whole room of a full grid's benches (20 × 20) at once keeps
// its watchers: they are sent every bench's new state in one take.
func TestHubKeepsAWatcherOfAFullGrid(t *testing.T) {
	h := newHub()
	w := h.subscribe(7)
	states := make([]*pb.BenchState, domain.MaxGridRows*domain.MaxGridColumns)
	for i := range states {
		states[i] = benchState(uint64(i+1), 1)
	}
	h.publishBenches(7, states)
	h.publishFindings(7, &pb.RoomFindings{})
	select {
	case <-w.gone:
		t.Fatalf("dropped after a change to %d benches", len(states))
	default:
	}
	if got := len(w.take()); got != len(states)+1 {
		t.Errorf("took %d events, want %d", got, len(states)+1)
	}
}
