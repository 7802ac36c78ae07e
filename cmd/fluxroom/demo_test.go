package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"regexp"
	"strings"
	"sync"
	"testing"
	"time"

	"example.com/fluxroom/domain"
	pb "example.com/fluxroom/proto/fluxroompb"
)

// lockedBuffer is a bytes.Buffer safe for the demo's printing goroutine.
type lockedBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

func (l *lockedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// TestDemoRunsAClass runs the real demo command at a fast pace: fifteen
// simulated benches on five experiments join and submit over native gRPC,
// and the last room summary shows each seeded mistake where it was seeded.
func TestDemoRunsAClass(t *testing.T) {
	var out lockedBuffer
	m := NewMain(&out, io.Discard)
	err := m.Run(context.Background(), []string{"demo", "--addr", "127.0.0.1:0", "--data", t.TempDir(),
		"--pace", "5ms", "--every", "200ms", "--duration", "3s"})
	if err != nil {
		t.Fatalf("demo: %v\n%s", err, out.String())
	}
	text := out.String()
	if !regexp.MustCompile(`dashboard: http://127\.0\.0\.1:\d+/\?session=1`).MatchString(text) {
		t.Errorf("demo printed no dashboard URL:\n%s", text)
	}
	if !regexp.MustCompile(`as the course's assistant, Ines Valdés-Okafor: http://127\.0\.0\.1:\d+/#key=\S+`).MatchString(text) {
		t.Errorf("demo printed no assistant's URL:\n%s", text)
	}
	last := text[strings.LastIndex(text, "— room at"):]
	lines := map[string]string{}
	for _, l := range strings.Split(last, "\n")[1:] {
		if f := strings.Fields(l); len(f) > 1 {
			lines[f[0]] = l
		}
	}
	if len(lines) != 15 {
		t.Fatalf("last summary has %d benches, want 15:\n%s", len(lines), last)
	}
	for label, l := range lines {
		f := strings.Fields(l)
		want, code := "consistent", demoMistakes[label]
		switch {
		case label == demoUnsafe:
			want = "unsafe"
		case code == domain.CodeLengthDoubled || code == domain.CodeProbeAtEnd || code == domain.CodeWireBackground:
			want = "off"
		case code != "":
			want = "check"
		}
		if len(f) < 3 || f[2] != want {
			t.Errorf("%s: %q, want verdict %s", label, l, want)
		}
		if code != "" && !strings.Contains(l, causeOf(code)) {
			t.Errorf("%s: reason does not name the seeded cause %q: %q", label, causeOf(code), l)
		}
		if !strings.Contains(l, fmt.Sprintf("%d readings", readingsOf(t, label))) {
			t.Errorf("%s did not finish its run: %q", label, l)
		}
	}
}

func causeOf(code string) string {
	for _, e := range domain.Catalogue() {
		if e.Code == code {
			return e.Cause
		}
	}
	return code
}

func readingsOf(t *testing.T, label string) int {
	class, err := demoClass(2026)
	if err != nil {
		t.Fatal(err)
	}
	for _, b := range class {
		if b.label == label {
			return len(b.group.Readings)
		}
	}
	return -1
}

// TestRoomSummaryPrintsChanges: the demo's terminal prints a bench again
// only when its state changed, and nothing when no bench did.
func TestRoomSummaryPrintsChanges(t *testing.T) {
	now := time.Date(2026, 3, 5, 14, 0, 0, 0, time.UTC)
	bench := func(id uint64, label, verdict string, n int32) *pb.BenchState {
		return &pb.BenchState{Bench: &pb.Bench{BenchId: id, Label: label, Experiment: "coil_force"}, VerdictLabel: verdict, ReadingCount: n}
	}
	states := map[uint64]*pb.BenchState{1: bench(1, "A1", "need data", 2), 2: bench(2, "A2", "consistent", 5)}
	shown := map[uint64]string{}
	first := roomSummary(now, states, shown)
	if !strings.Contains(first, "A1") || !strings.Contains(first, "A2") {
		t.Errorf("first print %q, want both benches", first)
	}
	if again := roomSummary(now.Add(5*time.Second), states, shown); again != "" {
		t.Errorf("no change printed %q, want nothing", again)
	}
	states[1] = bench(1, "A1", "check", 3)
	next := roomSummary(now.Add(10*time.Second), states, shown)
	if !strings.Contains(next, "A1") || strings.Contains(next, "A2") {
		t.Errorf("after A1 changed: %q, want A1 alone", next)
	}
}
