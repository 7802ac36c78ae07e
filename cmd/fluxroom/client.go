package main

import (
	"crypto/tls"
	"crypto/x509"
	"flag"
	"fmt"
	"os"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"

	"example.com/fluxroom/internal/bearer"
)

// clientFlags are how the commands that call a running server (submit,
// backup --server, export --server) reach it: plaintext on a trusted
// network, or TLS as `serve --tls-cert` serves it.
type clientFlags struct {
	tls   *bool
	tlsCA *string
}

func addClientFlags(fs *flag.FlagSet) clientFlags {
	return clientFlags{
		tls:   fs.Bool("tls", false, "connect over TLS, trusting the system's certificate authorities"),
		tlsCA: fs.String("tls-ca", "", "connect over TLS, trusting this PEM certificate (a self-signed server's --tls-cert, or its CA)"),
	}
}

// keyFlag registers --key, the caller's staff key or the administrator's,
// and --instructor-key, its name before staff accounts, on the same value.
func keyFlag(fs *flag.FlagSet) *string {
	k := fs.String("key", "", "your staff key, or the administrator's key, for --server")
	fs.StringVar(k, "instructor-key", "", "the same as --key (its name before staff accounts)")
	return k
}

// dial connects to addr; key, when set, is sent as the bearer token with
// every call.
func (c clientFlags) dial(addr, key string) (*grpc.ClientConn, error) {
	creds := insecure.NewCredentials()
	if *c.tls || *c.tlsCA != "" {
		cfg := &tls.Config{MinVersion: tls.VersionTLS12}
		if *c.tlsCA != "" {
			pem, err := os.ReadFile(*c.tlsCA)
			if err != nil {
				return nil, fmt.Errorf("--tls-ca: %w", err)
			}
			pool := x509.NewCertPool()
			if !pool.AppendCertsFromPEM(pem) {
				return nil, usageError{fmt.Sprintf("--tls-ca %s: no PEM certificate in it", *c.tlsCA)}
			}
			cfg.RootCAs = pool
		}
		creds = credentials.NewTLS(cfg)
	}
	opts := []grpc.DialOption{grpc.WithTransportCredentials(creds)}
	if key != "" {
		opts = append(opts, grpc.WithPerRPCCredentials(bearer.Token(key)))
	}
	return grpc.NewClient(addr, opts...)
}
