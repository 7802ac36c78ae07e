package wasmclient

import (
	"encoding/base64"
	"strconv"
	"strings"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/genproto/googleapis/rpc/status"
	"google.golang.org/protobuf/proto"
)

// The gRPC-Web framing is in internal/grpcweb; this is how the dashboard
// reads a call's status from it.

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
