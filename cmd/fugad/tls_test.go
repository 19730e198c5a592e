package main

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"io"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/status"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/server"
)

// Transport security, end to end over loopback TCP: the certificates are
// made here (ECDSA P-256, a test CA of our own), written to files, and
// loaded through the same path the binary takes (parseConfig, then
// config.tlsConfig, then server.NewHost with HostOptions.TLS).

// testPKI is a certificate authority made for one test.
type testPKI struct {
	cert *x509.Certificate
	key  *ecdsa.PrivateKey
	pem  []byte
}

var serial int64

func nextSerial() *big.Int { serial++; return big.NewInt(serial) }

func newKey(t *testing.T) *ecdsa.PrivateKey {
	t.Helper()
	k, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	return k
}

// newCA returns a self-signed CA valid for an hour.
func newCA(t *testing.T, name string) *testPKI {
	t.Helper()
	key := newKey(t)
	tmpl := &x509.Certificate{
		SerialNumber:          nextSerial(),
		Subject:               pkix.Name{CommonName: name, Organization: []string{"fugad test"}},
		NotBefore:             time.Now().Add(-time.Minute),
		NotAfter:              time.Now().Add(time.Hour),
		IsCA:                  true,
		BasicConstraintsValid: true,
		KeyUsage:              x509.KeyUsageCertSign | x509.KeyUsageDigitalSignature,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	cert, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	return &testPKI{cert: cert, key: key, pem: pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der})}
}

// issue returns the PEM certificate and key of a leaf signed by ca, for
// the given extended key usage, valid for localhost and 127.0.0.1.
func (ca *testPKI) issue(t *testing.T, name string, usage x509.ExtKeyUsage) (certPEM, keyPEM []byte) {
	t.Helper()
	key := newKey(t)
	tmpl := &x509.Certificate{
		SerialNumber: nextSerial(),
		Subject:      pkix.Name{CommonName: name},
		NotBefore:    time.Now().Add(-time.Minute),
		NotAfter:     time.Now().Add(time.Hour),
		KeyUsage:     x509.KeyUsageDigitalSignature,
		ExtKeyUsage:  []x509.ExtKeyUsage{usage},
		DNSNames:     []string{"localhost"},
		IPAddresses:  []net.IP{net.IPv4(127, 0, 0, 1)},
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, ca.cert, &key.PublicKey, ca.key)
	if err != nil {
		t.Fatal(err)
	}
	kd, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	return pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kd})
}

func writeFile(t *testing.T, dir, name string, b []byte) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, b, 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}

// serverFiles writes a server certificate and key signed by ca, and ca's
// certificate, and returns their paths.
func serverFiles(t *testing.T, ca *testPKI) (cert, key, caFile string) {
	t.Helper()
	dir := t.TempDir()
	c, k := ca.issue(t, "fugad", x509.ExtKeyUsageServerAuth)
	return writeFile(t, dir, "server.pem", c), writeFile(t, dir, "server-key.pem", k), writeFile(t, dir, "ca.pem", ca.pem)
}

// startServer builds the server from command-line flags as the binary does
// and serves it on a loopback port; it returns the address.
func startServer(t *testing.T, args ...string) string {
	t.Helper()
	c, err := parseConfig(append([]string{"--grpc-addr=127.0.0.1:0", "--metrics-addr="}, args...), env(nil), io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	tc, err := c.tlsConfig()
	if err != nil {
		t.Fatal(err)
	}
	if tc == nil {
		t.Fatal("TLS flags given but no TLS configuration built")
	}
	reg := prometheus.NewRegistry()
	srv, err := server.New(c.Server, nil, reg)
	if err != nil {
		t.Fatal(err)
	}
	host, err := server.NewHost(srv, reg, server.HostOptions{TLS: tc, DrainTimeout: 5 * time.Second})
	if err != nil {
		t.Fatal(err)
	}
	lis, err := net.Listen("tcp", c.GRPCAddr)
	if err != nil {
		t.Fatal(err)
	}
	served := make(chan error, 1)
	go func() { served <- host.Serve(lis) }()
	t.Cleanup(func() {
		host.Shutdown()
		if err := <-served; err != nil {
			t.Errorf("Serve: %v", err)
		}
	})
	return lis.Addr().String()
}

// call makes one health check and one ListModels call with creds and
// returns the first error.
func call(t *testing.T, addr string, creds credentials.TransportCredentials) error {
	t.Helper()
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(creds))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	r, err := healthpb.NewHealthClient(conn).Check(ctx, &healthpb.HealthCheckRequest{Service: server.HealthReadiness})
	if err != nil {
		return err
	}
	if r.GetStatus() != healthpb.HealthCheckResponse_SERVING {
		t.Fatalf("readiness %v over TLS, want SERVING", r.GetStatus())
	}
	m, err := fugadv1.NewFugadServiceClient(conn).ListModels(ctx, &fugadv1.ListModelsRequest{})
	if err != nil {
		return err
	}
	if len(m.GetModels()) == 0 {
		t.Fatal("ListModels over TLS returned no models")
	}
	return nil
}

// clientTLS returns client credentials trusting roots (PEM), presenting
// the key pair (PEM) when given, for server name "localhost".
func clientTLS(t *testing.T, roots []byte, certPEM, keyPEM []byte) credentials.TransportCredentials {
	t.Helper()
	pool := x509.NewCertPool()
	if !pool.AppendCertsFromPEM(roots) {
		t.Fatal("bad roots")
	}
	tc := &tls.Config{RootCAs: pool, ServerName: "localhost", MinVersion: tls.VersionTLS12}
	if certPEM != nil {
		kp, err := tls.X509KeyPair(certPEM, keyPEM)
		if err != nil {
			t.Fatal(err)
		}
		tc.Certificates = []tls.Certificate{kp}
	}
	return credentials.NewTLS(tc)
}

// wantRefused fails t unless err is the UNAVAILABLE a client gets when
// its connection cannot be established or is cut by the handshake.
func wantRefused(t *testing.T, what string, err error) {
	t.Helper()
	if err == nil {
		t.Errorf("%s: call succeeded, want it refused", what)
		return
	}
	if status.Code(err) != codes.Unavailable {
		t.Errorf("%s: %v, want UNAVAILABLE (connection refused by the handshake)", what, err)
	}
}

// TestTLS checks a server with --tls-cert and --tls-key: a TLS client
// trusting the CA gets answers; a plaintext client, a client trusting
// another CA, one expecting another server name and one limited to TLS
// 1.1 (below the configured minimum, TLS 1.2) are refused.
func TestTLS(t *testing.T) {
	ca := newCA(t, "fugad test CA")
	cert, key, _ := serverFiles(t, ca)
	addr := startServer(t, "--tls-cert="+cert, "--tls-key="+key)

	if err := call(t, addr, clientTLS(t, ca.pem, nil, nil)); err != nil {
		t.Errorf("TLS client trusting the CA: %v", err)
	}
	wantRefused(t, "plaintext client", call(t, addr, insecure.NewCredentials()))
	other := newCA(t, "unrelated CA")
	wantRefused(t, "client trusting another CA", call(t, addr, clientTLS(t, other.pem, nil, nil)))

	pool := x509.NewCertPool()
	pool.AppendCertsFromPEM(ca.pem)
	wrongName := credentials.NewTLS(&tls.Config{RootCAs: pool, ServerName: "fugad.other.example", MinVersion: tls.VersionTLS12})
	wantRefused(t, "client expecting another server name", call(t, addr, wrongName))
	old := credentials.NewTLS(&tls.Config{RootCAs: pool, ServerName: "localhost", MinVersion: tls.VersionTLS10, MaxVersion: tls.VersionTLS11})
	wantRefused(t, "TLS 1.1 client", call(t, addr, old))
}

// TestMutualTLS checks a server that also has --tls-client-ca: a client
// with a certificate signed by that CA gets answers; a client without a
// certificate, one whose certificate comes from an unknown CA, and one
// whose certificate is for server authentication only are refused.
func TestMutualTLS(t *testing.T) {
	ca := newCA(t, "fugad test CA")
	cert, key, caFile := serverFiles(t, ca)
	addr := startServer(t, "--tls-cert="+cert, "--tls-key="+key, "--tls-client-ca="+caFile)

	goodCert, goodKey := ca.issue(t, "twin-client", x509.ExtKeyUsageClientAuth)
	if err := call(t, addr, clientTLS(t, ca.pem, goodCert, goodKey)); err != nil {
		t.Errorf("client with a CA-signed certificate: %v", err)
	}
	wantRefused(t, "client without a certificate", call(t, addr, clientTLS(t, ca.pem, nil, nil)))
	rogue := newCA(t, "rogue CA")
	rc, rk := rogue.issue(t, "twin-client", x509.ExtKeyUsageClientAuth)
	wantRefused(t, "client with a certificate from an unknown CA", call(t, addr, clientTLS(t, ca.pem, rc, rk)))
	sc, sk := ca.issue(t, "not-a-client", x509.ExtKeyUsageServerAuth)
	wantRefused(t, "client with a server-only certificate", call(t, addr, clientTLS(t, ca.pem, sc, sk)))
	wantRefused(t, "plaintext client", call(t, addr, insecure.NewCredentials()))
}

// TestTLSConfigErrors checks that unusable TLS files stop the binary at
// start-up with an error, rather than serving without TLS.
func TestTLSConfigErrors(t *testing.T) {
	ca := newCA(t, "fugad test CA")
	cert, key, caFile := serverFiles(t, ca)
	dir := t.TempDir()
	_, otherKey := ca.issue(t, "other", x509.ExtKeyUsageServerAuth)
	mismatched := writeFile(t, dir, "other-key.pem", otherKey)
	empty := writeFile(t, dir, "empty.pem", []byte("no certificates here\n"))
	missing := filepath.Join(dir, "missing.pem")
	cases := map[string][]string{
		"missing certificate":  {"--tls-cert=" + missing, "--tls-key=" + key},
		"missing key":          {"--tls-cert=" + cert, "--tls-key=" + missing},
		"key of another cert":  {"--tls-cert=" + cert, "--tls-key=" + mismatched},
		"client CA missing":    {"--tls-cert=" + cert, "--tls-key=" + key, "--tls-client-ca=" + missing},
		"client CA without CA": {"--tls-cert=" + cert, "--tls-key=" + key, "--tls-client-ca=" + empty},
	}
	for name, args := range cases {
		c, err := parseConfig(args, env(nil), io.Discard)
		if err != nil {
			t.Fatalf("%s: parse: %v", name, err)
		}
		if tc, err := c.tlsConfig(); err == nil {
			t.Errorf("%s: tlsConfig succeeded (%v), want an error", name, tc != nil)
		}
	}
	c, err := parseConfig([]string{"--tls-cert=" + cert, "--tls-key=" + key, "--tls-client-ca=" + caFile}, env(nil), io.Discard)
	if err != nil {
		t.Fatal(err)
	}
	tc, err := c.tlsConfig()
	if err != nil {
		t.Fatal(err)
	}
	if tc.ClientAuth != tls.RequireAndVerifyClientCert || tc.MinVersion < tls.VersionTLS12 {
		t.Errorf("client auth %v, min version %#x; want RequireAndVerifyClientCert and at least TLS 1.2", tc.ClientAuth, tc.MinVersion)
	}
	if c, _ := parseConfig(nil, env(nil), io.Discard); c != nil {
		if tc, err := c.tlsConfig(); tc != nil || err != nil {
			t.Errorf("without TLS flags: %v, %v; want plaintext (nil, nil)", tc, err)
		}
	}
}
