package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sync"
	"testing"

	"example.com/fluxroom/domain"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
	"example.com/fluxroom/store"
)

// TestHotBackupAndRestore backs up a serving database while readings keep
// arriving, checks the copy, restores it in place of a new file and serves
// it again.
func TestHotBackupAndRestore(t *testing.T) {
	dbPath := filepath.Join(t.TempDir(), "live.db")
	p := startProgram(t, t.TempDir(), dbPath, "127.0.0.1:0")
	conn := dialInstructor(t, p.addr)
	defer conn.Close()
	ctx := context.Background()
	in, st := rpcpb.NewInstructorServiceClient(conn), rpcpb.NewStationServiceClient(conn)
	cs, _ := in.CreateSession(ctx, &pb.CreateSessionRequest{Title: "backup"})
	sb, _ := in.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: cs.Session.SessionId, Benches: []*pb.Bench{{Label: "A1", Experiment: "coil_force"}}})
	bid := sb.Benches[0].BenchId
	send := func(i int) {
		if _, err := st.SubmitReading(ctx, &pb.SubmitReadingRequest{SessionId: cs.Session.SessionId, BenchId: bid, ReadingId: fmt.Sprintf("b%d", i),
			Values: map[string]*pb.Quantity{"current": q(float64(i%5), "A"), "force": q(0.48*float64(i%5), "N")}}); err != nil {
			t.Error(err)
		}
	}
	for i := 0; i < 40; i++ {
		send(i)
	}
	out := filepath.Join(t.TempDir(), "backup.db")
	var wg sync.WaitGroup
	wg.Add(1)
	go func() { // writers go on during the backup
		defer wg.Done()
		for i := 40; i < 80; i++ {
			send(i)
		}
	}()
	err := NewMain(io.Discard, io.Discard).Run(ctx, []string{"backup", "--server", p.addr, "--key", testKey, "--out", out})
	wg.Wait()
	if err != nil {
		t.Fatal(err)
	}
	p.stop(t)

	b, err := store.Open(out, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	_, rs, _ := b.BenchReadings(cs.Session.SessionId, bid)
	if err := b.Check(); err != nil || len(rs) < 40 {
		t.Errorf("backup: check %v, %d readings; want clean and at least the 40 sent before it", err, len(rs))
	}
	b.Close()

	restored := filepath.Join(t.TempDir(), "restored.db")
	if err := NewMain(io.Discard, io.Discard).Run(ctx, []string{"restore", "--from", out, "--db", restored}); err != nil {
		t.Fatal(err)
	}
	p2 := startProgram(t, t.TempDir(), restored, "127.0.0.1:0")
	defer p2.stop(t)
	c2 := dialInstructor(t, p2.addr)
	defer c2.Close()
	d, err := rpcpb.NewInstructorServiceClient(c2).GetBenchDetail(ctx, &pb.GetBenchDetailRequest{SessionId: cs.Session.SessionId, BenchId: bid})
	if err != nil || len(d.Detail.Readings) != len(rs) {
		t.Errorf("restored server: %v, %d readings; want %d", err, len(d.GetDetail().GetReadings()), len(rs))
	}
	// Restoring over a file a server holds is refused.
	if err := NewMain(io.Discard, io.Discard).Run(ctx, []string{"restore", "--from", out, "--db", restored}); err == nil {
		t.Error("restore over a served file succeeded")
	}
}

// TestRestoreKeepsEveryEarlierFile: each restore keeps the file it replaces
// under a name of its own; a second restore never overwrites the first one's.
func TestRestoreKeepsEveryEarlierFile(t *testing.T) {
	dir := t.TempDir()
	ctx := context.Background()
	// Three files of one session each, titled so they can be told apart.
	files := make([]string, 3)
	for i := range files {
		files[i] = filepath.Join(dir, fmt.Sprintf("term-%d.db", i))
		db, err := store.Open(files[i], store.Options{})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := db.CreateSession(domain.Session{Title: fmt.Sprintf("section %d", i), JoinCode: fmt.Sprintf("CODE%02d", i)}); err != nil {
			t.Fatal(err)
		}
		db.Close()
	}
	live := filepath.Join(dir, "fluxroom.db")
	if err := os.Link(files[0], live); err != nil {
		t.Fatal(err)
	}
	for _, from := range files[1:] {
		if err := NewMain(io.Discard, io.Discard).Run(ctx, []string{"restore", "--from", from, "--db", live}); err != nil {
			t.Fatal(err)
		}
	}
	for name, want := range map[string]string{live + ".before-restore": "section 0", live + ".before-restore.1": "section 1", live: "section 2"} {
		db, err := store.Open(name, store.Options{ReadOnly: true})
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		ss, err := db.Sessions()
		db.Close()
		if err != nil || len(ss) != 1 || ss[0].Title != want {
			t.Errorf("%s holds %+v (%v), want %q", filepath.Base(name), ss, err, want)
		}
	}
}
