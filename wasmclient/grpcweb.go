package wasmclient

import (
	"encoding/base64"
	"encoding/binary"
	"strconv"
	"strings"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/genproto/googleapis/rpc/status"
	"google.golang.org/protobuf/proto"
)

// The binary gRPC-Web framing [pub: gRPC-Web protocol, doc/PROTOCOL-WEB.md of
// the gRPC project]: each message is a flag byte (0x00 data, 0x80 trailers),
// a 4-byte big-endian length and the bytes. Trailers are HTTP header lines.

// frame wraps one request message.
func frame(msg []byte) []byte {
	out := make([]byte, 5+len(msg))
	binary.BigEndian.PutUint32(out[1:5], uint32(len(msg)))
	copy(out[5:], msg)
	return out
}

// deframer splits a response body, which arrives in arbitrary chunks, into
// frames.
type deframer struct {
	buf []byte
}

// push adds bytes and returns every complete frame: data messages and, when
// it came, the trailer block.
func (d *deframer) push(b []byte) (msgs [][]byte, trailer []byte, ok bool) {
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

// statusFrom reads grpc-status, grpc-message and grpc-status-details-bin
// from trailer lines (or response headers) into an error; nil for OK.
func statusFrom(get func(string) string) error {
	s := get("grpc-status")
	if s == "" {
		return nil
	}
	code, err := strconv.Atoi(strings.TrimSpace(s))
	if err != nil {
		return &rpcError{code: codeUnknown, msg: "bad grpc-status " + s}
	}
	if code == 0 {
		return nil
	}
	e := &rpcError{code: code, msg: percentDecode(get("grpc-message"))}
	if bin := get("grpc-status-details-bin"); bin != "" {
		raw, err := base64.RawStdEncoding.DecodeString(strings.TrimRight(bin, "="))
		var st status.Status
		if err == nil && proto.Unmarshal(raw, &st) == nil {
			for _, d := range st.GetDetails() {
				var br errdetails.BadRequest
				if d.MessageIs(&br) && d.UnmarshalTo(&br) == nil {
					e.fields = map[string]string{}
					for _, fv := range br.GetFieldViolations() {
						e.fields[fv.GetField()] = fv.GetDescription()
					}
				}
			}
		}
	}
	return e
}

// trailerLines parses a trailer block into a lookup by lower-case name.
func trailerLines(b []byte) func(string) string {
	m := map[string]string{}
	for _, line := range strings.Split(string(b), "\r\n") {
		k, v, ok := strings.Cut(line, ":")
		if ok {
			m[strings.ToLower(strings.TrimSpace(k))] = strings.TrimSpace(v)
		}
	}
	return func(k string) string { return m[k] }
}

// percentDecode undoes the percent-encoding of grpc-message.
func percentDecode(s string) string {
	if !strings.Contains(s, "%") {
		return s
	}
	var b strings.Builder
	for i := 0; i < len(s); i++ {
		if s[i] == '%' && i+2 < len(s) {
			if v, err := strconv.ParseUint(s[i+1:i+3], 16, 8); err == nil {
				b.WriteByte(byte(v))
				i += 2
				continue
			}
		}
		b.WriteByte(s[i])
	}
	return b.String()
}
