package main

import (
	"context"
	"fmt"
	"os"
	"time"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"

	"example.com/fluxroom/internal/readingscsv"
	"example.com/fluxroom/internal/wire"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

// submitCmd sends a CSV's rows for one bench to a live session as readings
// over native gRPC. Each row's reading id comes from its content, so running
// it twice stores nothing twice.
func (m *Main) submitCmd(ctx context.Context, args []string) error {
	fs := m.newFlags("submit")
	addr := fs.String("server", "127.0.0.1:8080", "the fluxroom server, host:port")
	code := fs.String("code", "", "the session's join code")
	bench := fs.String("bench", "", "the bench label; rows of other benches are skipped")
	client := addClientFlags(fs)
	if err := parseArgs(fs, args); err != nil {
		return err
	}
	switch {
	case fs.NArg() != 1:
		return usageError{"submit: give one readings CSV file"}
	case *code == "":
		return usageError{"submit: --code is required (the join code on the instructor's screen)"}
	case *bench == "":
		return usageError{"submit: --bench is required"}
	}
	f, err := os.Open(fs.Arg(0))
	if err != nil {
		return err
	}
	benches, errs, err := readingscsv.Read(f)
	f.Close()
	if err != nil {
		return fmt.Errorf("%s: %w", fs.Arg(0), err)
	}
	for _, e := range errs {
		fmt.Fprintf(m.Stderr, "%s: %s (not sent)\n", fs.Arg(0), e)
	}
	var rows *readingscsv.Bench
	for _, b := range benches {
		if b.Label == *bench || len(benches) == 1 && b.Label == "bench" {
			rows = b
		}
	}
	if rows == nil {
		return fmt.Errorf("%s has no rows for bench %q", fs.Arg(0), *bench)
	}
	conn, err := client.dial(*addr, "")
	if err != nil {
		return err
	}
	defer conn.Close()
	st := rpcpb.NewStationServiceClient(conn)
	cctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	join, err := st.JoinBench(cctx, &pb.JoinBenchRequest{JoinCode: *code, BenchLabel: *bench})
	if err != nil {
		return fmt.Errorf("join bench %s: %w", *bench, err)
	}
	if join.Bench.Experiment != rows.Bench.Experiment {
		return fmt.Errorf("bench %s is set up for %s, but the file's rows are %s", *bench, join.Bench.Experiment, rows.Bench.Experiment)
	}
	tctx := metadata.AppendToOutgoingContext(cctx, "authorization", "Bearer "+join.StationToken)
	var stored, dup int
	var last *pb.SubmitReadingResponse
	for i, r := range rows.Readings {
		req := &pb.SubmitReadingRequest{SessionId: join.SessionId, BenchId: join.Bench.BenchId,
			ReadingId: "csv-" + rows.Keys[i], Values: wire.ValuesToPB(r.Values)}
		// Past the bench's rate limit the server says ResourceExhausted: wait
		// and send the same reading again (its id makes that safe).
		for {
			last, err = st.SubmitReading(tctx, req)
			if status.Code(err) != codes.ResourceExhausted {
				break
			}
			select {
			case <-tctx.Done():
				return tctx.Err()
			case <-time.After(250 * time.Millisecond):
			}
		}
		if err != nil {
			return fmt.Errorf("line %d: %w", rows.Lines[i], err)
		}
		if last.Duplicate {
			dup++
		} else {
			stored++
		}
	}
	now, err := st.GetBenchState(tctx, &pb.GetBenchStateRequest{SessionId: join.SessionId, BenchId: join.Bench.BenchId})
	if err != nil {
		return fmt.Errorf("read the bench's state back: %w", err)
	}
	fmt.Fprintf(m.Stdout, "bench %s: %d readings stored, %d already there; now %s: %s\n", *bench, stored, dup,
		now.GetState().GetVerdictLabel(), now.GetState().GetReason())
	if len(errs) > 0 {
		return fmt.Errorf("%d bad rows or cells were not sent", len(errs))
	}
	return nil
}
