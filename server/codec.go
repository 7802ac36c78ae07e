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
// concatenation of its fields', so each stream sends its sequence field
// followed by the shared bytes of the event, and a room of a hundred tabs
// costs one encoding per change, not a hundred.

// roomEvent is one published event with its shared encoding: the
// WatchRoomResponse without its sequence.
type roomEvent struct {
	msg  *pb.WatchRoomResponse
	body []byte
	// key names what the event is the whole state of: its bench (by id),
	// or the room's findings (findingsKey). A newer event with the same
	// key replaces one a watcher has not been sent yet.
	key uint64
}

// findingsKey is the key of the room's findings; bench ids start at 1 and
// never reach it.
const findingsKey = math.MaxUint64

func newRoomEvent(ev *pb.WatchRoomResponse) (*roomEvent, error) {
	body, err := proto.Marshal(ev)
	if err != nil {
		return nil, fmt.Errorf("encode room event: %w", err)
	}
	re := &roomEvent{msg: ev, body: body, key: findingsKey}
	if b := ev.GetBench(); b != nil {
		re.key = b.GetBench().GetBenchId()
	}
	return re, nil
}

// sequenced is a roomEvent as one stream sends it.
type sequenced struct {
	seq uint64
	ev  *roomEvent
}

// wireBytes is the WatchRoomResponse encoding: field 1, the sequence, then
// the event's fields.
func (m sequenced) wireBytes() []byte {
	b := make([]byte, 0, protowire.SizeTag(1)+protowire.SizeVarint(m.seq)+len(m.ev.body))
	b = protowire.AppendTag(b, 1, protowire.VarintType)
	b = protowire.AppendVarint(b, m.seq)
	return append(b, m.ev.body...)
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
