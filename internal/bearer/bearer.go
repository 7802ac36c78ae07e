// Package bearer gives Go clients of fluxroom their credential: the
// instructor key or a station token, sent as "authorization: Bearer …" on
// every call.
package bearer

import "context"

// Token is a per-call gRPC credential.
type Token string

// GetRequestMetadata implements credentials.PerRPCCredentials.
func (t Token) GetRequestMetadata(ctx context.Context, uri ...string) (map[string]string, error) {
	if t == "" {
		return nil, nil
	}
	return map[string]string{"authorization": "Bearer " + string(t)}, nil
}

// RequireTransportSecurity is false: a class server on a lab's loopback or
// LAN may run without TLS (the server warns when it does off loopback).
func (t Token) RequireTransportSecurity() bool { return false }
