package server

import (
	"fmt"
	"math"

	"google.golang.org/grpc/encoding"
	_ "google.golang.org/grpc/encoding/proto" // registers the codec wrapped here
	"google.golang.org/grpc/mem"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	pb "example.com/fluxroom/proto/fluxroompb"
)

// A room event goes to every watcher of the room, each stream with its own
// sequence number. It is encoded once: a protobuf message's encoding is the
// concatenation of its fields', so an event is kept as the encoding of one
// RoomChanges field (a bench's state, or the findings), and each stream
// sends its sequence field and a RoomChanges made of the bytes of every
// event waiting for it. A room of a hundred tabs costs one encoding per
// change, not a hundred, and a stream one message per wake-up, not one per
// change.

// roomEvent is one published change with its shared encoding: the
// RoomChanges field it sets.
type roomEvent struct {
	body []byte
	// key names what the event is the whole state of: its bench (by id),
	// or the room's findings (findingsKey). A newer event with the same
	// key replaces one a watcher has not been sent yet.
	key uint64
}

// findingsKey is the key of the room's findings; bench ids start at 1 and
// never reach it.
const findingsKey = math.MaxUint64

// benchChanged is the event of a bench's new state.
func benchChanged(st *pb.BenchState) (*roomEvent, error) {
	body, err := proto.Marshal(&pb.RoomChanges{Benches: []*pb.BenchState{st}})
	if err != nil {
		return nil, fmt.Errorf("encode bench %d's state: %w", st.GetBench().GetBenchId(), err)
	}
	return &roomEvent{body: body, key: st.GetBench().GetBenchId()}, nil
}

// findingsChanged is the event of the room's new findings.
func findingsChanged(f *pb.RoomFindings) (*roomEvent, error) {
	body, err := proto.Marshal(&pb.RoomChanges{Findings: f})
	if err != nil {
		return nil, fmt.Errorf("encode room findings: %w", err)
	}
	return &roomEvent{body: body, key: findingsKey}, nil
}

// sequenced is the events waiting for one stream, as the one message it
// sends them in.
type sequenced struct {
	seq uint64
	evs []*roomEvent
}

// wireBytes is the WatchRoomResponse encoding: field 1, the sequence, then
// field 5, the RoomChanges made of the events' fields.
func (m sequenced) wireBytes() []byte {
	n := 0
	for _, ev := range m.evs {
		n += len(ev.body)
	}
	b := make([]byte, 0, protowire.SizeTag(1)+protowire.SizeVarint(m.seq)+protowire.SizeTag(5)+protowire.SizeBytes(n))
	b = protowire.AppendTag(b, 1, protowire.VarintType)
	b = protowire.AppendVarint(b, m.seq)
	b = protowire.AppendTag(b, 5, protowire.BytesType)
	b = protowire.AppendVarint(b, uint64(n))
	for _, ev := range m.evs {
		b = append(b, ev.body...)
	}
	return b
}

// codec is the server's protobuf codec, which also sends a sequenced event
// as its bytes.
type codec struct{ proto encoding.CodecV2 }

func newCodec() codec { return codec{proto: encoding.GetCodecV2("proto")} }

func (c codec) Marshal(v any) (mem.BufferSlice, error) {
	if m, ok := v.(sequenced); ok {
		return mem.BufferSlice{mem.SliceBuffer(m.wireBytes())}, nil
	}
	return c.proto.Marshal(v)
}

func (c codec) Unmarshal(data mem.BufferSlice, v any) error { return c.proto.Unmarshal(data, v) }

func (c codec) Name() string { return c.proto.Name() }
