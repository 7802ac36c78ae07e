package grpcweb

import (
	"bytes"
	"testing"
)

// A response body arrives in arbitrary chunks: the deframer returns each
// message whole, in order, then the trailers, however it was cut.
func TestDeframerAcrossChunks(t *testing.T) {
	trailer := []byte("grpc-status: 0\r\ngrpc-message: fine%20then\r\n")
	var body []byte
	msgs := [][]byte{[]byte("first"), {}, bytes.Repeat([]byte{0xAB}, 300)}
	for _, m := range msgs {
		body = append(body, Frame(m)...)
	}
	tf := Frame(trailer)
	tf[0] = 0x80
	body = append(body, tf...)
	for _, chunk := range []int{1, 2, 5, 7, 64, len(body)} {
		var d Deframer
		var got [][]byte
		var gotTrailer []byte
		for i := 0; i < len(body); i += chunk {
			ms, tr, done := d.Push(body[i:min(i+chunk, len(body))])
			got = append(got, ms...)
			if done {
				gotTrailer = tr
			}
		}
		if len(got) != len(msgs) {
			t.Fatalf("chunks of %d: %d messages, want %d", chunk, len(got), len(msgs))
		}
		for i := range msgs {
			if !bytes.Equal(got[i], msgs[i]) {
				t.Errorf("chunks of %d: message %d = %x, want %x", chunk, i, got[i], msgs[i])
			}
		}
		if get := TrailerLines(gotTrailer); get("grpc-status") != "0" || get("grpc-message") != "fine%20then" {
			t.Errorf("chunks of %d: trailers %q", chunk, gotTrailer)
		}
	}
}
