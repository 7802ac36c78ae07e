package main

import (
	"bytes"
	"context"
	"flag"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"

	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata/")

// TestAnalyzeGolden runs `fluxroom analyze --json` on the example CSV of
// the README and compares with the golden report (go test -update rewrites it).
func TestAnalyzeGolden(t *testing.T) {
	var out bytes.Buffer
	m := NewMain(&out, io.Discard)
	if err := m.Run(context.Background(), []string{"analyze", "--json", "../../testdata/readings-example.csv"}); err != nil {
		t.Fatal(err)
	}
	golden := filepath.Join("..", "..", "testdata", "analyze-example.golden.json")
	if *update {
		if err := os.WriteFile(golden, out.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(golden)
	if err != nil {
		t.Fatal(err)
	}
	if diff := cmp.Diff(out.String(), string(want)); diff != "" {
		t.Errorf("analyze --json (-got +want):\n%s", diff)
	}
	for _, s := range []string{`"coil_force.sensor_not_zeroed"`, `"e_over_m.diameter_as_radius"`, `"straight_wire.tip_offset"`} {
		if !strings.Contains(out.String(), s) {
			t.Errorf("report lacks %s", s)
		}
	}
}

func TestAnalyzeBadRows(t *testing.T) {
	csvText := `bench,experiment,current [A],force [N],turns [1]
A1,coil_force,0,0.001,100
A1,coil_force,1,0.48x,100
A1,coil_force,2,0.962,100
A1,coil_force,3,0.1e999,100
A1,coil_force,3,1.44,200
A1,coil_force,4,1.921,100
B1,levitation,1,1,1
A1,coil_force,5,,100
`
	path := filepath.Join(t.TempDir(), "r.csv")
	os.WriteFile(path, []byte(csvText), 0o644)
	var out, errOut bytes.Buffer
	m := NewMain(&out, &errOut)
	err := m.Run(context.Background(), []string{"analyze", path})
	if err == nil {
		t.Fatal("analyze of a file with bad rows succeeded; want a non-zero exit")
	}
	for _, want := range []string{
		`line 3, column 4 (force [N]): not a number: "0.48x"`,
		"line 5, column 4 (force [N])",
		"line 6, column 5 (turns [1]): bench A1 has turns = 100",
		`line 8, column 2 (experiment): unknown experiment "levitation"`,
		`line 9, column 4 (force [N]): is missing`,
	} {
		if !strings.Contains(errOut.String(), want) {
			t.Errorf("errors lack %q:\n%s", want, errOut.String())
		}
	}
	// The three good rows were still analysed.
	if !strings.Contains(out.String(), "A1") || !strings.Contains(out.String(), "slope") {
		t.Errorf("good rows not analysed:\n%s", out.String())
	}
}

// TestSubmitIsIdempotent sends a CSV to a real server twice: the second run
// stores nothing.
func TestSubmitIsIdempotent(t *testing.T) {
	p := startProgram(t, t.TempDir(), filepath.Join(t.TempDir(), "f.db"), "127.0.0.1:0")
	defer p.stop(t)
	conn := dialInstructor(t, p.addr)
	defer conn.Close()
	ctx := context.Background()
	in := rpcpb.NewInstructorServiceClient(conn)
	cs, err := in.CreateSession(ctx, &pb.CreateSessionRequest{Title: "csv"})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := in.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: cs.Session.SessionId, Benches: []*pb.Bench{
		{Label: "A2", Experiment: "coil_force"}}}); err != nil {
		t.Fatal(err)
	}
	args := []string{"submit", "--server", p.addr, "--code", cs.Session.JoinCode, "--bench", "A2", "../../testdata/readings-example.csv"}
	var first, second bytes.Buffer
	if err := NewMain(&first, io.Discard).Run(ctx, args); err != nil {
		t.Fatal(err)
	}
	// A station sees its verdict only once the session allows it.
	if !strings.Contains(first.String(), "shown after class") {
		t.Errorf("first run, verdicts hidden: %s", first.String())
	}
	if _, err := in.UpdateSession(ctx, &pb.UpdateSessionRequest{SessionId: cs.Session.SessionId, StationsSeeVerdicts: true}); err != nil {
		t.Fatal(err)
	}
	if err := NewMain(&second, io.Discard).Run(ctx, args); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(first.String(), "11 readings stored, 0 already there") {
		t.Errorf("first run: %s", first.String())
	}
	if !strings.Contains(second.String(), "0 readings stored, 11 already there") {
		t.Errorf("second run: %s", second.String())
	}
	if !strings.Contains(second.String(), "not zeroed") {
		t.Errorf("bench state after submit: %s", second.String())
	}
}
