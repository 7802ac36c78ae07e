package main

import (
	"bytes"
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/binary"
	"encoding/pem"
	"fmt"
	"io"
	"math/big"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/protobuf/proto"

	"example.com/fluxroom/internal/bearer"
	pb "example.com/fluxroom/proto/fluxroompb"
	"example.com/fluxroom/proto/rpcpb"
)

// selfSigned writes a certificate for 127.0.0.1 and returns its files and
// a pool that trusts it.
func selfSigned(t *testing.T) (certFile, keyFile string, pool *x509.CertPool) {
	t.Helper()
	key, _ := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	tmpl := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "fluxroom test"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour), IPAddresses: []net.IP{net.ParseIP("127.0.0.1")},
		KeyUsage: x509.KeyUsageDigitalSignature, ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	certFile, keyFile = filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
	os.WriteFile(certFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600)
	kb, _ := x509.MarshalECPrivateKey(key)
	os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kb}), 0o600)
	cert, _ := x509.ParseCertificate(der)
	pool = x509.NewCertPool()
	pool.AddCert(cert)
	return certFile, keyFile, pool
}

// startTLS runs the real program serving TLS with a self-signed
// certificate, and an instructor's native gRPC connection to it that trusts
// the certificate (its file and pool are returned too).
func startTLS(t *testing.T) (*program, *grpc.ClientConn, string, *x509.CertPool) {
	t.Helper()
	certFile, keyFile, pool := selfSigned(t)
	p := startProgram(t, t.TempDir(), filepath.Join(t.TempDir(), "f.db"), "127.0.0.1:0", "--tls-cert", certFile, "--tls-key", keyFile)
	t.Cleanup(func() { p.stop(t) })
	conn, err := grpc.NewClient(p.addr, grpc.WithTransportCredentials(credentials.NewTLS(&tls.Config{RootCAs: pool})),
		grpc.WithPerRPCCredentials(bearer.Token(testKey)))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return p, conn, certFile, pool
}

// TestTLSOnOnePort serves over TLS and reaches, on the one port: native
// gRPC, the dashboard page over HTTP/2 and HTTP/1.1, and gRPC-Web as a
// browser sends it.
func TestTLSOnOnePort(t *testing.T) {
	p, conn, _, pool := startTLS(t)
	ctx := context.Background()
	if _, err := rpcpb.NewInstructorServiceClient(conn).ListSessions(ctx, &pb.ListSessionsRequest{}); err != nil {
		t.Errorf("native gRPC over TLS: %v", err)
	}
	if h, err := healthpb.NewHealthClient(conn).Check(ctx, &healthpb.HealthCheckRequest{}); err != nil || h.Status != healthpb.HealthCheckResponse_SERVING {
		t.Errorf("health over TLS: %v %v", h, err)
	}

	for _, h2 := range []bool{true, false} {
		tr := &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}, ForceAttemptHTTP2: h2}
		if !h2 {
			tr.TLSNextProto = map[string]func(string, *tls.Conn) http.RoundTripper{}
		}
		c := &http.Client{Transport: tr, Timeout: 10 * time.Second}
		resp, err := c.Get("https://" + p.addr + "/")
		if err != nil {
			t.Fatalf("page over TLS (h2 %v): %v", h2, err)
		}
		resp.Body.Close()
		if resp.StatusCode != 200 || (resp.ProtoMajor == 2) != h2 {
			t.Errorf("page over TLS: %s %s, want 200 over HTTP/%d", resp.Status, resp.Proto, map[bool]int{true: 2, false: 1}[h2])
		}
		// gRPC-Web, framed as the dashboard frames it.
		body, _ := proto.Marshal(&pb.ListExperimentsRequest{})
		frame := make([]byte, 5+len(body))
		binary.BigEndian.PutUint32(frame[1:5], uint32(len(body)))
		copy(frame[5:], body)
		req, _ := http.NewRequest("POST", "https://"+p.addr+"/fluxroom.v1.StationService/ListExperiments", bytes.NewReader(frame))
		req.Header.Set("Content-Type", "application/grpc-web+proto")
		req.Header.Set("X-Grpc-Web", "1")
		resp, err = c.Do(req)
		if err != nil {
			t.Fatalf("gRPC-Web over TLS (h2 %v): %v", h2, err)
		}
		out, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != 200 || !strings.Contains(strings.ToLower(string(out)), "grpc-status: 0") || len(out) < 100 {
			t.Errorf("gRPC-Web over TLS (h2 %v): %s, %d bytes, trailer %q", h2, resp.Status, len(out), tail(out))
		}
	}
}

func tail(b []byte) string {
	if len(b) > 60 {
		b = b[len(b)-60:]
	}
	return string(b)
}

// TestToolsOverTLS: the commands that call a running server reach one that
// serves TLS with a self-signed certificate, trusting it with --tls-ca:
// submit sends a bench's rows, export --server fetches the session's JSON,
// backup --server copies the file; without --tls-ca they fail.
func TestToolsOverTLS(t *testing.T) {
	p, conn, certFile, _ := startTLS(t)
	ctx := context.Background()
	in := rpcpb.NewInstructorServiceClient(conn)
	cs, err := in.CreateSession(ctx, &pb.CreateSessionRequest{Title: "Kestrel Vale · PHY 142 · over TLS"})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := in.SetBenches(ctx, &pb.SetBenchesRequest{SessionId: cs.Session.SessionId, Benches: []*pb.Bench{{Label: "A1", Experiment: "coil_force"}}}); err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	csv := filepath.Join(dir, "a1.csv")
	os.WriteFile(csv, []byte("bench,experiment,current [A],force [N]\nA1,coil_force,0,0.001\nA1,coil_force,1,0.481\nA1,coil_force,2,0.962\n"), 0o644)
	sid := fmt.Sprint(cs.Session.SessionId)
	run := func(args ...string) (string, error) {
		var out bytes.Buffer
		err := NewMain(&out, &out).Run(ctx, args)
		return out.String(), err
	}
	if out, err := run("submit", "--server", p.addr, "--tls-ca", certFile, "--code", cs.Session.JoinCode, "--bench", "A1", csv); err != nil {
		t.Fatalf("submit over TLS: %v\n%s", err, out)
	}
	out, err := run("export", "--server", p.addr, "--tls-ca", certFile, "--instructor-key", testKey, "--session", sid, "--format", "json")
	if err != nil || !strings.Contains(out, "over TLS") || !strings.Contains(out, `"bench": "A1"`) {
		t.Errorf("export --server over TLS: %v\n%.400s", err, out)
	}
	backup := filepath.Join(dir, "copy.db")
	if out, err := run("backup", "--server", p.addr, "--tls-ca", certFile, "--instructor-key", testKey, "--out", backup); err != nil {
		t.Errorf("backup --server over TLS: %v\n%s", err, out)
	} else if _, err := os.Stat(backup); err != nil {
		t.Errorf("backup file: %v", err)
	}
	tctx, cancel := context.WithTimeout(ctx, 5*time.Second)
	defer cancel()
	var out2 bytes.Buffer
	if err := NewMain(&out2, &out2).Run(tctx, []string{"export", "--server", p.addr, "--instructor-key", testKey, "--session", sid}); err == nil {
		t.Error("export --server in plaintext to a TLS server succeeded")
	}
}
