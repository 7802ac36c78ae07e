package main

import (
	"bytes"
	"context"
	"errors"
	"os"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// The load program runs end to end on a small sweep: every server starts as
// a child, every phase measures something, and the targets are checked.
func TestLoadtestRuns(t *testing.T) {
	if testing.Short() {
		t.Skip("starts several servers")
	}
	bin := fluxroomBinary(t)
	childExecutable = func() (string, error) { return bin, nil }
	defer func() { childExecutable = os.Executable }()
	var out bytes.Buffer
	err := NewMain(&out, &out).Run(context.Background(), []string{"loadtest", "--stations", "40", "--watchers", "2",
		"--light", "200", "--heavy", "300", "--duration", "400ms", "--callers", "64"})
	if err != nil {
		t.Fatalf("%v\n%s", err, out.String())
	}
	for _, want := range []string{"baseline echo:", "the empty call", "baseline bbolt:", "closed loop", "longest run 30)", "M=40 stations",
		"light   200/s offered", "verdicts missing at watchers 0", "group commits",
		"baseline: the bare echo at 200/s over 40 connections", "baseline: the bare echo at 300/s over 40 connections", "fairness at 200/s", "restart on the filled file",
		"in-use pages grew", "targets"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("the output has no %q:\n%s", want, out.String())
		}
	}
	if strings.Contains(out.String(), "NaN") {
		t.Errorf("a figure is NaN:\n%s", out.String())
	}
}

func TestParseBytes(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want int64
		ok   bool
	}{
		{"300MiB", 300 << 20, true}, {"2GiB", 2 << 30, true}, {"1.5GiB", 3 << 29, true}, {"512 KiB", 512 << 10, true},
		{"300", 0, false}, {"MiB", 0, false}, {"-1MiB", 0, false}, {"lots GiB", 0, false},
	} {
		got, err := parseBytes(tc.in)
		if (err == nil) != tc.ok || got != tc.want {
			t.Errorf("parseBytes(%q) = %d, %v; want %d, ok %v", tc.in, got, err, tc.want, tc.ok)
		}
	}
}

// serve refuses a bad memory setting before it opens anything.
func TestServeRejectsBadMemoryFlags(t *testing.T) {
	for _, tc := range []struct {
		name string
		args []string
		flag string
	}{
		{"limit without a unit", []string{"--memory-limit", "300"}, "--memory-limit"},
		{"negative limit", []string{"--memory-limit", "-1GiB"}, "--memory-limit"},
		{"zero gc percent", []string{"--gc-percent", "0"}, "--gc-percent"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			db := t.TempDir() + "/fluxroom.db"
			var out bytes.Buffer
			err := NewMain(&out, &out).Run(context.Background(), append([]string{"serve", "--db", db, "--addr", "127.0.0.1:0"}, tc.args...))
			var ue usageError
			if !errors.As(err, &ue) || !strings.Contains(err.Error(), tc.flag) {
				t.Fatalf("serve %v: %v; want a usage error naming %s", tc.args, err, tc.flag)
			}
			if _, serr := os.Stat(db); !errors.Is(serr, os.ErrNotExist) {
				t.Errorf("serve %v made %s before refusing", tc.args, db)
			}
		})
	}
}

// The load program's dashboards read two fields of each room event from its
// bytes; they must read what protobuf's own decoding reads.
func TestBenchEventReadsWhatProtobufReads(t *testing.T) {
	state := &pb.BenchState{Bench: &pb.Bench{BenchId: 300, Label: "C4", Row: 2, Column: 3, Experiment: "coil_force",
		Constants: map[string]*pb.Quantity{"turns": {Value: 100, Unit: "1"}}},
		Verdict: pb.Verdict_VERDICT_CHECK, Reason: "likely sensor not zeroed", ReadingCount: 17,
		Diagnoses: []*pb.Diagnosis{{Code: "coil_force.sensor_not_zeroed", Evidence: "intercept 0.06 N"}}, Z: 2.5}
	for _, tc := range []struct {
		name      string
		ev        *pb.WatchRoomResponse
		wantBench bool
	}{
		{"bench", &pb.WatchRoomResponse{Sequence: 9, Event: &pb.WatchRoomResponse_Bench{Bench: state}}, true},
		{"bench without readings", &pb.WatchRoomResponse{Sequence: 1, Event: &pb.WatchRoomResponse_Bench{Bench: &pb.BenchState{Bench: &pb.Bench{BenchId: 2}}}}, true},
		{"findings", &pb.WatchRoomResponse{Sequence: 10, Event: &pb.WatchRoomResponse_Findings{Findings: &pb.RoomFindings{}}}, false},
		{"snapshot", &pb.WatchRoomResponse{Event: &pb.WatchRoomResponse_Snapshot{Snapshot: &pb.RoomSnapshot{Benches: []*pb.BenchState{state}}}}, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			b, err := proto.Marshal(tc.ev)
			if err != nil {
				t.Fatal(err)
			}
			id, count, ok, err := benchEvent(b)
			if err != nil || ok != tc.wantBench {
				t.Fatalf("benchEvent: ok %v, %v; want ok %v", ok, err, tc.wantBench)
			}
			var back pb.WatchRoomResponse
			if err := proto.Unmarshal(b, &back); err != nil {
				t.Fatal(err)
			}
			if got, want := [2]uint64{id, uint64(count)}, [2]uint64{back.GetBench().GetBench().GetBenchId(), uint64(back.GetBench().GetReadingCount())}; got != want {
				t.Errorf("benchEvent read bench %d count %d; protobuf reads %d, %d", got[0], got[1], want[0], want[1])
			}
		})
	}
	if _, _, _, err := benchEvent([]byte{0x1a, 0x05, 0x01}); err == nil {
		t.Error("a truncated event parsed")
	}
}
