package server

import (
	"context"
	"fmt"
	"sync/atomic"
	"testing"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/metadata"

	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

// BenchmarkSubmitReading is one durable reading through the real server on
// loopback: a station's call decoded, checked against its token, committed
// to a bbolt file and answered, and its bench judged after it, with the
// test's client in the same process. allocs/op counts both ends; the
// server's share is read from a -memprofile. Callers send runs of 30
// readings to a bench each, as a lab does, then take an unused bench, so
// the judging measured is that of lab-length runs.
// BenchmarkSubmitReadingUnjudged (a failpoints build) leaves the judging out,
// to show its share of a reading's cost:
//
//	go test -tags failpoints -run '^$' -bench SubmitReading -benchmem ./server/
func BenchmarkSubmitReading(b *testing.B) { benchmarkSubmitReading(b, nil) }

func benchmarkSubmitReading(b *testing.B, prepare func(*Server)) {
	const (
		runLength = 30
		perRoom   = 30
		conns     = 8
	)
	// No station is held back: the rate limit is measured in the load
	// program's fairness phase, not here.
	r := startRigPrepared(b, Config{StationRate: 1e9, StationBurst: 1 << 30}, prepare)
	ctx := context.Background()
	benches := b.N/runLength + 1
	var calls []context.Context // one per bench, carrying its station token
	var ids [][2]uint64         // session and bench ids
	for len(calls) < benches {
		cs, err := r.instructor.CreateSession(ctx, &pb.CreateSessionRequest{Title: fmt.Sprintf("Room %d", len(calls)/perRoom)})
		if err != nil {
			b.Fatal(err)
		}
		var room []*pb.Bench
		for i := 0; i < perRoom; i++ {
			room = append(room, forceBench(fmt.Sprintf("B%d", i+1), int32(i/6), int32(i%6)))
		}
		if _, err := r.instructor.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: cs.Session.SessionId, Benches: room}); err != nil {
			b.Fatal(err)
		}
		for i := 0; i < perRoom && len(calls) < benches; i++ {
			join, err := r.station.JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: cs.Session.JoinCode, BenchLabel: room[i].Label})
			if err != nil {
				b.Fatal(err)
			}
			calls = append(calls, metadata.AppendToOutgoingContext(ctx, "authorization", "Bearer "+join.StationToken))
			ids = append(ids, [2]uint64{cs.Session.SessionId, join.Bench.BenchId})
		}
	}
	var clients []rpcpb.StationServiceClient
	for i := 0; i < conns; i++ {
		c, err := grpc.NewClient(r.addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
		if err != nil {
			b.Fatal(err)
		}
		b.Cleanup(func() { c.Close() })
		clients = append(clients, rpcpb.NewStationServiceClient(c))
	}
	var nextBench, nextCaller atomic.Int64
	b.SetParallelism(64) // 128 callers on 2 cores
	b.ReportAllocs()
	b.ResetTimer()
	b.RunParallel(func(pbt *testing.PB) {
		client := clients[int(nextCaller.Add(1))%conns]
		bench, i := int(nextBench.Add(1)-1)%benches, 0
		for pbt.Next() {
			if i == runLength {
				bench, i = int(nextBench.Add(1)-1)%benches, 0
			}
			current := 0.2 + 0.1*float64(i)
			// F = N·B·L·I with the bench's 100 turns, 0.12 T and 4 cm, and
			// a little scatter.
			force := 0.48*current + 0.002*float64(i%3-1)
			_, err := client.SubmitReading(calls[bench], &pb.SubmitReadingRequest{SessionId: ids[bench][0], BenchId: ids[bench][1],
				ReadingId: fmt.Sprintf("r%d", i),
				Values:    map[string]*pb.Quantity{"current": q(current, "A"), "force": q(force, "N")}})
			if err != nil {
				b.Error(err)
				return
			}
			i++
		}
	})
}
