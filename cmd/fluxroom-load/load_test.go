package main

import (
	"bytes"
	"context"
	"errors"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"google.golang.org/protobuf/proto"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// build compiles a package of the module into dir and returns the binary.
func build(t *testing.T, dir, pkg string) string {
	t.Helper()
	bin := filepath.Join(dir, filepath.Base(pkg))
	if out, err := exec.Command("go", "build", "-o", bin, pkg).CombinedOutput(); err != nil {
		t.Fatalf("go build %s: %v\n%s", pkg, err, out)
	}
	return bin
}

// The load program runs end to end on a small sweep against the real
// fluxroom program: every server starts as a child, every phase measures
// something, and the targets are checked.
func TestLoadtestRuns(t *testing.T) {
	if testing.Short() {
		t.Skip("starts several servers")
	}
	dir := t.TempDir()
	fluxroom := build(t, dir, "example.com/fluxroom/cmd/fluxroom")
	self := build(t, dir, "example.com/fluxroom/cmd/fluxroom-load")
	echoExecutable = func() (string, error) { return self, nil }
	defer func() { echoExecutable = os.Executable }()
	var out bytes.Buffer
	err := run(context.Background(), &out, &out, []string{"--fluxroom", fluxroom, "--stations", "40", "--watchers", "2",
		"--light", "200", "--heavy", "300", "--duration", "400ms", "--callers", "64"})
	if err != nil {
		t.Fatalf("%v\n%s", err, out.String())
	}
	for _, want := range []string{"baseline echo:", "the empty call", "baseline bbolt:", "closed loop", "longest run 30)", "M=40 stations",
		"light   200/s offered", "verdicts missing at watchers 0", "group commits",
		"baseline: the bare echo at 200/s over 40 connections", "baseline: the bare echo at 300/s over 40 connections", "fairness at 200/s", "restart on the filled file",
		"in-use pages grew", "judge lag (commit → state published)", "server CPU per durable judged reading", "targets: "} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("the output has no %q:\n%s", want, out.String())
		}
	}
	if strings.Contains(out.String(), "NaN") {
		t.Errorf("a figure is NaN:\n%s", out.String())
	}
}

// The load program's dashboards read two fields of each bench in a room
// event from its bytes; they must read what protobuf's own decoding reads.
func TestChangedBenchesReadsWhatProtobufReads(t *testing.T) {
	state := &pb.BenchState{Bench: &pb.Bench{BenchId: 300, Label: "C4", Row: 2, Column: 3, Experiment: "coil_force",
		Constants: map[string]*pb.Quantity{"turns": {Value: 100, Unit: "1"}}},
		Verdict: pb.Verdict_VERDICT_CHECK, Reason: "likely sensor not zeroed", ReadingCount: 17,
		Diagnoses: []*pb.Diagnosis{{Code: "coil_force.sensor_not_zeroed", Evidence: "intercept 0.06 N"}}, Z: 2.5}
	bare := &pb.BenchState{Bench: &pb.Bench{BenchId: 2}}
	findings := &pb.RoomFindings{Findings: []*pb.RoomFinding{{Code: "room.shared_cause", BenchIds: []uint64{2, 300}}}}
	changes := func(seq uint64, ch *pb.RoomChanges) *pb.WatchRoomResponse {
		return &pb.WatchRoomResponse{Sequence: seq, Event: &pb.WatchRoomResponse_Changes{Changes: ch}}
	}
	for _, tc := range []struct {
		name string
		ev   *pb.WatchRoomResponse
	}{
		{"one bench", changes(9, &pb.RoomChanges{Benches: []*pb.BenchState{state}})},
		{"bench without readings", changes(1, &pb.RoomChanges{Benches: []*pb.BenchState{bare}})},
		{"two benches and findings", changes(12, &pb.RoomChanges{Benches: []*pb.BenchState{state, bare}, Findings: findings})},
		{"findings", changes(10, &pb.RoomChanges{Findings: findings})},
		{"snapshot", &pb.WatchRoomResponse{Event: &pb.WatchRoomResponse_Snapshot{Snapshot: &pb.RoomSnapshot{Benches: []*pb.BenchState{state}}}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			b, err := proto.Marshal(tc.ev)
			if err != nil {
				t.Fatal(err)
			}
			var got [][2]uint64
			if err := changedBenches(b, func(id uint64, count int32) { got = append(got, [2]uint64{id, uint64(count)}) }); err != nil {
				t.Fatal(err)
			}
			var back pb.WatchRoomResponse
			if err := proto.Unmarshal(b, &back); err != nil {
				t.Fatal(err)
			}
			var want [][2]uint64
			for _, st := range back.GetChanges().GetBenches() {
				want = append(want, [2]uint64{st.GetBench().GetBenchId(), uint64(st.GetReadingCount())})
			}
			if !slices.Equal(got, want) {
				t.Errorf("changedBenches read %v; protobuf reads %v", got, want)
			}
		})
	}
	for _, bad := range [][]byte{{0x2a, 0x05, 0x01}, {0x2a, 0x03, 0x0a, 0x05, 0x01}} {
		if err := changedBenches(bad, func(uint64, int32) {}); err == nil {
			t.Errorf("a truncated event %x parsed", bad)
		}
	}
}

// TestProductHasNoLoadProgram: the fluxroom program ships the product; its
// load program and echo server are this command's.
func TestProductHasNoLoadProgram(t *testing.T) {
	fluxroom := build(t, t.TempDir(), "example.com/fluxroom/cmd/fluxroom")
	for _, cmd := range []string{"loadtest", "loadtest-echo"} {
		out, err := exec.Command(fluxroom, cmd).CombinedOutput()
		if err == nil || !strings.Contains(string(out), "unknown command") {
			t.Errorf("fluxroom %s: %v %q; want an unknown command", cmd, err, out)
		}
	}
}

// TestRefusesAMissingProgram: without the program to measure, the load
// program says what to do instead of failing in its first phase.
func TestRefusesAMissingProgram(t *testing.T) {
	var out bytes.Buffer
	err := run(context.Background(), &out, &out, []string{"--fluxroom", filepath.Join(t.TempDir(), "none")})
	var ue usageError
	if !errors.As(err, &ue) || !strings.Contains(err.Error(), "make build") {
		t.Errorf("err = %v, want a usage error that says to run make build", err)
	}
}

// A machine that slows down through the run slows the echo and fluxroom
// alike: each fluxroom round set against the echo rounds either side of it
// keeps the ratio that one early echo would have lost.
func TestAlternateFollowsTheMachinesDrift(t *testing.T) {
	var echoRound, fluxRound int
	echo := func(time.Duration) (float64, closedCPU) {
		echoRound++ // 10, 20, 30, 40 µs a call: the machine slows down
		return 1000 / float64(echoRound), closedCPU{server: 10e-6 * float64(echoRound), gen: 5e-6 * float64(echoRound)}
	}
	flux := func(time.Duration) (float64, closedCPU) {
		fluxRound++ // between echo rounds k and k+1: 2.5 × their mean
		mean := 10e-6 * (float64(fluxRound) + 0.5)
		return 500 / (float64(fluxRound) + 0.5), closedCPU{server: 2.5 * mean, gen: mean / 2}
	}
	got := alternate(3, time.Second, echo, flux)
	if echoRound != 4 || fluxRound != 3 {
		t.Fatalf("%d echo and %d fluxroom rounds, want 4 and 3", echoRound, fluxRound)
	}
	for i, r := range got.cpuRatios {
		if math.Abs(r-2.5) > 1e-9 {
			t.Errorf("round %d: CPU ratio %.3f, want 2.5", i, r)
		}
	}
	if r := got.cpuRatio(); math.Abs(r-2.5) > 1e-9 {
		t.Errorf("median CPU ratio %.3f, want 2.5", r)
	}
	if r := got.genRatio(); math.Abs(r-1) > 1e-9 {
		t.Errorf("median load-generator ratio %.3f, want 1", r)
	}
	// Calls over the mean of the echo's calls either side: the first round
	// (500 / 1.5) / ((1000 + 500) / 2).
	if r, want := got.rateRatios[0], 500/1.5/750; math.Abs(r-want) > 1e-9 {
		t.Errorf("first round's ingest ratio %.4f, want %.4f", r, want)
	}
	// Over all rounds: calls over time, CPU over calls.
	if want := (500/1.5 + 500/2.5 + 500/3.5) / 3; math.Abs(got.rate-want) > 1e-9 {
		t.Errorf("fluxroom's rate %.2f/s, want %.2f", got.rate, want)
	}
	if want := 1e-5 * (1000 + 1000 + 1000 + 1000) / (1000 + 500 + 1000.0/3 + 250); math.Abs(got.echoCPU.server-want) > 1e-12 {
		t.Errorf("echo's CPU per call %.3g s, want %.3g", got.echoCPU.server, want)
	}
}

func TestMedian(t *testing.T) {
	for _, tc := range []struct {
		xs   []float64
		want float64
	}{{nil, 0}, {[]float64{3}, 3}, {[]float64{3, 1, 2}, 2}, {[]float64{4, 1, 3, 2}, 2.5}} {
		if got := median(tc.xs); got != tc.want {
			t.Errorf("median(%v) = %g, want %g", tc.xs, got, tc.want)
		}
	}
}
