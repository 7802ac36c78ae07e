package main

import (
	"bytes"
	"context"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"

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
