package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"net/http"
	"path/filepath"
	"strconv"
	"sync"
	"sync/atomic"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/internal/bearer"
	"example.com/fluxroom/internal/grpcweb"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

// The simulated room: station laptops, lab sections, dashboards.

// loadStation is one simulated bench laptop. Between phases a new lab
// section takes the same laptops: the station joins a fresh bench and keeps
// its connection, so every phase judges runs of a realistic length.
type loadStation struct {
	sid, bid uint64
	token    string
	// st is the station's client on its own connection; calls carry the
	// token of the bench it is joined to now.
	st rpcpb.StationServiceClient
	// sent numbers the readings it made, for their ids and values.
	sent atomic.Int64
	// stored counts its readings the server took on this bench: in the open
	// loop a station sends one at a time, so the count is the bench's
	// reading count that the room stream shows once the reading is judged.
	stored atomic.Int32
	// slipped stations type every force ten times too small, a mistake the
	// room then diagnoses: one group in five, so the judging measured is a
	// lab's mix of clean runs and diagnosed ones.
	slipped bool
}

// stationDialOptions are a station program's connection options: plain
// text on loopback, static flow-control windows as the server has, so
// neither end spends a ping round trip per reading probing the bandwidth,
// and small buffers.
func stationDialOptions() []grpc.DialOption {
	return []grpc.DialOption{grpc.WithTransportCredentials(insecure.NewCredentials()),
		grpc.WithInitialWindowSize(1 << 20), grpc.WithInitialConnWindowSize(1 << 20),
		// A laptop has one connection; the load program has thousands, and
		// grpc-go's 32 KiB buffers each would make it the bigger process.
		grpc.WithReadBufferSize(4 << 10), grpc.WithWriteBufferSize(4 << 10), grpc.WithSharedWriteBuffer(true)}
}

func (s *loadStation) creds() grpc.CallOption { return grpc.PerRPCCredentials(bearer.Token(s.token)) }

// loadNBL is N·B·L of a coil-force bench with the default constants
// (100 turns, 4 cm, 0.12 T), in N/A.
const loadNBL = 0.48

// reading is the station's next reading: a coil-force run stepping the
// current, force following F = N·B·L·I with 1 % noise (a tenth of it at a
// slipped station).
func (s *loadStation) reading() *pb.SubmitReadingRequest {
	k := s.sent.Add(1)
	I := 0.5 + float64(k%8)*0.5
	nbl := loadNBL
	if s.slipped {
		nbl /= 10
	}
	F := nbl * I * (1 + 0.01*float64(k%5-2))
	return &pb.SubmitReadingRequest{SessionId: s.sid, BenchId: s.bid, ReadingId: "l" + strconv.FormatInt(k, 10),
		Values: map[string]*pb.Quantity{"current": {Value: I, Unit: "A"}, "force": {Value: F, Unit: "N"}}}
}

// loadRoom is a server with its sessions and joined stations.
type loadRoom struct {
	c        *child
	fluxroom string // the program the server runs
	db       string
	admin    *grpc.ClientConn
	in       rpcpb.InstructorServiceClient
	sessions []uint64 // the current section's
	stations []*loadStation
	conns    []*grpc.ClientConn
	sections int
}

func (r *loadRoom) close() {
	for _, c := range r.conns {
		c.Close()
	}
	if r.admin != nil {
		r.admin.Close()
	}
}

// newLoadRoom starts a server of the fluxroom program on a fresh file and
// joins n stations to a first section. With own, every station dials its
// own connection and makes one call on it.
func newLoadRoom(fluxroom, dir string, n int, own bool, serveArgs ...string) (*loadRoom, time.Duration, error) {
	db := filepath.Join(dir, fmt.Sprintf("load-%d.db", time.Now().UnixNano()))
	c, startup, err := startChild(fluxroom, append([]string{"serve", "--db", db, "--log-level", "error", "--admin-key", loadKey}, serveArgs...)...)
	if err != nil {
		return nil, 0, err
	}
	r := &loadRoom{c: c, fluxroom: fluxroom, db: db}
	if r.admin, err = grpc.NewClient(c.addr, grpc.WithTransportCredentials(insecure.NewCredentials()), grpc.WithPerRPCCredentials(bearer.Token(loadKey))); err != nil {
		c.kill()
		return nil, 0, err
	}
	r.in = rpcpb.NewInstructorServiceClient(r.admin)
	for range n {
		r.stations = append(r.stations, &loadStation{slipped: len(r.stations)%5 == 4})
	}
	if err := r.newSection(); err != nil {
		c.kill()
		return nil, 0, err
	}
	if own {
		if err := r.connectAll(); err != nil {
			c.kill()
			return nil, 0, err
		}
	}
	return r, startup, nil
}

// newSection starts a new lab section: sessions of 30 benches for all the
// stations, each station joined to one bench.
func (r *loadRoom) newSection() error {
	ctx := context.Background()
	r.sections++
	r.sessions = r.sessions[:0]
	for first := 0; first < len(r.stations); first += 30 {
		cs, err := r.in.CreateSession(ctx, &pb.CreateSessionRequest{Title: fmt.Sprintf("Harrowgate load, section %d room %d", r.sections, len(r.sessions)+1)})
		if err != nil {
			return err
		}
		r.sessions = append(r.sessions, cs.Session.SessionId)
		group := r.stations[first:min(first+30, len(r.stations))]
		var bs []*pb.Bench
		for i := range group {
			bs = append(bs, &pb.Bench{Label: fmt.Sprintf("B%02d", i+1), Row: int32(i / 6), Column: int32(i % 6), Experiment: "coil_force"})
		}
		sb, err := r.in.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: cs.Session.SessionId, Benches: bs})
		if err != nil {
			return err
		}
		for i, b := range sb.Benches {
			j, err := rpcpb.NewStationServiceClient(r.admin).JoinBench(ctx, &pb.JoinBenchRequest{JoinCode: cs.Session.JoinCode, BenchLabel: b.Label})
			if err != nil {
				return err
			}
			s := group[i]
			s.sid, s.bid, s.token = cs.Session.SessionId, b.BenchId, j.StationToken
			s.stored.Store(0)
		}
	}
	return nil
}

// connectAll gives every station its own connection, opened by one call.
func (r *loadRoom) connectAll() error {
	for _, s := range r.stations {
		c, err := grpc.NewClient(r.c.addr, stationDialOptions()...)
		if err != nil {
			return err
		}
		r.conns = append(r.conns, c)
		s.st = rpcpb.NewStationServiceClient(c)
	}
	return openEach(len(r.stations), func(i int) error {
		s := r.stations[i]
		_, err := s.st.GetBenchState(context.Background(), &pb.GetBenchStateRequest{SessionId: s.sid, BenchId: s.bid}, s.creds())
		return err
	})
}

// openEach makes the first call on each of n new connections, 64 at a
// time (a connection opens with its first call), and returns the first
// error, so the phases measure open connections only.
func openEach(n int, first func(i int) error) error {
	var mu sync.Mutex
	var firstErr error
	sem := make(chan struct{}, 64)
	var wg sync.WaitGroup
	for i := 0; i < n; i++ {
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer wg.Done()
			defer func() { <-sem }()
			if err := first(i); err != nil {
				mu.Lock()
				if firstErr == nil {
					firstErr = err
				}
				mu.Unlock()
			}
		}()
	}
	wg.Wait()
	return firstErr
}

// webWatch follows a room as the dashboard does: WatchRoom over gRPC-Web
// on its own HTTP/1.1 connection, through the server's HTTP side, and hands
// each event over as the message's bytes. It returns when the stream or ctx
// ends, or onEvent fails.
func webWatch(ctx context.Context, addr string, sessionID uint64, onEvent func([]byte) error) error {
	body, err := proto.Marshal(&pb.WatchRoomRequest{SessionId: sessionID})
	if err != nil {
		return err
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, "http://"+addr+"/"+rpcpb.InstructorService_ServiceDesc.ServiceName+"/WatchRoom",
		bytes.NewReader(grpcweb.Frame(body)))
	if err != nil {
		return err
	}
	req.Header.Set("Content-Type", grpcweb.ContentType)
	req.Header.Set("Accept", grpcweb.ContentType)
	req.Header.Set("X-Grpc-Web", "1")
	req.Header.Set("Authorization", "Bearer "+loadKey)
	tr := &http.Transport{}
	defer tr.CloseIdleConnections()
	resp, err := (&http.Client{Transport: tr}).Do(req)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK || resp.Header.Get("Grpc-Status") != "" && resp.Header.Get("Grpc-Status") != "0" {
		return fmt.Errorf("WatchRoom: HTTP %d, grpc-status %q %q", resp.StatusCode, resp.Header.Get("Grpc-Status"), resp.Header.Get("Grpc-Message"))
	}
	var d grpcweb.Deframer
	buf := make([]byte, 32<<10)
	for {
		n, err := resp.Body.Read(buf)
		msgs, trailer, done := d.Push(buf[:n])
		for _, m := range msgs {
			if err := onEvent(m); err != nil {
				return fmt.Errorf("WatchRoom event: %w", err)
			}
		}
		if done {
			return fmt.Errorf("WatchRoom ended: %s", grpcweb.TrailerLines(trailer)("grpc-message"))
		}
		if err != nil {
			return err
		}
	}
}

// changedBenches reads, from a WatchRoomResponse's bytes, what a simulated
// dashboard needs: each bench whose new state it carries, by id and reading
// count. A browser decodes the whole event on its own machine; the load
// generator shares the server's cores, so it reads these fields and skips
// the rest (field numbers from messages.proto: WatchRoomResponse.changes 5,
// RoomChanges.benches 1, BenchState.bench 1 and reading_count 6,
// Bench.bench_id 1). A snapshot or findings alone carry none.
func changedBenches(m []byte, each func(benchID uint64, count int32)) error {
	changes, found, err := wireField(m, 5, protowire.BytesType)
	if err != nil || !found {
		return err
	}
	return eachField(changes, 1, protowire.BytesType, func(state []byte) error {
		bench, _, err := wireField(state, 1, protowire.BytesType)
		if err != nil {
			return err
		}
		id, _, err := wireField(bench, 1, protowire.VarintType)
		if err != nil {
			return err
		}
		n, _, err := wireField(state, 6, protowire.VarintType)
		if err != nil {
			return err
		}
		v, _ := protowire.ConsumeVarint(id)
		c, _ := protowire.ConsumeVarint(n)
		each(v, int32(c))
		return nil
	})
}

// wireField finds field num of type typ in a message's bytes and returns
// its value's bytes (a varint's encoding, or a length-delimited field's
// contents).
func wireField(m []byte, num protowire.Number, typ protowire.Type) ([]byte, bool, error) {
	var v []byte
	err := eachField(m, num, typ, func(b []byte) error {
		v = b
		return errFound
	})
	if err == errFound {
		return v, true, nil
	}
	return nil, false, err
}

// errFound stops eachField at the first field wireField looks for.
var errFound = errors.New("found")

// eachField calls f with the value's bytes of every field num of type typ
// in a message's bytes, in order: a repeated field's elements.
func eachField(m []byte, num protowire.Number, typ protowire.Type, f func([]byte) error) error {
	for len(m) > 0 {
		n, t, l := protowire.ConsumeTag(m)
		if l < 0 {
			return protowire.ParseError(l)
		}
		m = m[l:]
		vl := protowire.ConsumeFieldValue(n, t, m)
		if vl < 0 {
			return protowire.ParseError(vl)
		}
		if n == num && t == typ {
			v := m[:vl]
			if t == protowire.BytesType {
				v, _ = protowire.ConsumeBytes(m)
			}
			if err := f(v); err != nil {
				return err
			}
		}
		m = m[vl:]
	}
	return nil
}
