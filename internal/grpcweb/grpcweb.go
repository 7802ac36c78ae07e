// Package grpcweb is the binary gRPC-Web framing [pub: gRPC-Web protocol,
// doc/PROTOCOL-WEB.md of the gRPC project], shared by the dashboard's own
// client and the load program's dashboard watchers: each message is a flag
// byte (0x00 data, 0x80 trailers), a 4-byte big-endian length and the
// bytes. Trailers are HTTP header lines.
package grpcweb

import (
	"encoding/binary"
	"strings"
)

// ContentType is the binary gRPC-Web content type with protobuf messages.
const ContentType = "application/grpc-web+proto"

// Frame wraps one request message.
func Frame(msg []byte) []byte {
	out := make([]byte, 5+len(msg))
	binary.BigEndian.PutUint32(out[1:5], uint32(len(msg)))
	copy(out[5:], msg)
	return out
}

// Deframer splits a response body, which arrives in arbitrary chunks, into
// frames.
type Deframer struct {
	buf []byte
}

// Push adds bytes and returns every complete frame: data messages and, when
// it came, the trailer block.
func (d *Deframer) Push(b []byte) (msgs [][]byte, trailer []byte, ok bool) {
	d.buf = append(d.buf, b...)
	for len(d.buf) >= 5 {
		n := int(binary.BigEndian.Uint32(d.buf[1:5]))
		if len(d.buf) < 5+n {
			break
		}
		body := append([]byte(nil), d.buf[5:5+n]...)
		flag := d.buf[0]
		d.buf = d.buf[5+n:]
		if flag&0x80 != 0 {
			return msgs, body, true
		}
		msgs = append(msgs, body)
	}
	return msgs, nil, false
}

// TrailerLines parses a trailer block into a lookup by lower-case name.
func TrailerLines(b []byte) func(string) string {
	m := map[string]string{}
	for _, line := range strings.Split(string(b), "\r\n") {
		k, v, ok := strings.Cut(line, ":")
		if ok {
			m[strings.ToLower(strings.TrimSpace(k))] = strings.TrimSpace(v)
		}
	}
	return func(k string) string { return m[k] }
}
