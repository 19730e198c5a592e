package main

import (
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/grpc/codes"

	"github.com/fugad/fugad/server"
)

// TestUsage checks the help texts: the overview lists every command, the
// units, the exit codes, the caution and examples in the fictional Kestrel
// Ridge scenario; each command's help has its flags and examples.
func TestUsage(t *testing.T) {
	r := runCLI(t, nil, "", "-h")
	if r.code != exitOK {
		t.Errorf("-h: exit %d", r.code)
	}
	for _, s := range []string{"Usage: fugactl", "Kestrel Ridge", "barg, psig", "101325 Pa", "Exit status: 0", "2 usage error",
		"not a basis for the", "licensed engineers", "--addr", "FUGACTL_ADDR", "--json", "--no-cache", "--tls", "--ca", "--cert", "--key", "--timeout"} {
		if !strings.Contains(r.stderr, s) {
			t.Errorf("fugactl -h lacks %q", s)
		}
	}
	for _, c := range commands {
		if !strings.Contains(r.stderr, "  "+c.name+" ") {
			t.Errorf("fugactl -h does not list %s", c.name)
		}
		h := runCLI(t, nil, "", c.name, "-h")
		if h.code != exitOK || !strings.Contains(h.stderr, "fugactl "+c.name+": ") || !strings.Contains(h.stderr, "Flags:") || !strings.Contains(h.stderr, "Exit status") {
			t.Errorf("fugactl %s -h: exit %d\n%s", c.name, h.code, h.stderr)
		}
		if hh := runCLI(t, nil, "", "help", c.name); hh.code != exitOK || !strings.Contains(hh.stdout, "fugactl "+c.name+": ") {
			t.Errorf("fugactl help %s: exit %d", c.name, hh.code)
		}
	}
	f := runCLI(t, nil, "", "flash", "-h")
	for _, s := range []string{"-T, --temperature", "-P, --pressure", "-H, --enthalpy", "-S, --entropy", "-V, --volume", "-U, --energy",
		"--beta, --vapour-fraction", "--fluid-file", "--basis", "Kestrel Ridge", "40C -P 70bar"} {
		if !strings.Contains(f.stderr, s) {
			t.Errorf("fugactl flash -h lacks %q", s)
		}
	}
}

// TestExitCodes checks the documented exit codes for usage errors and an
// unreachable server.
func TestExitCodes(t *testing.T) {
	for _, args := range [][]string{
		{},
		{"frobnicate"},
		{"models", "--no-such-flag"},
		{"--timeout", "soon", "models"},
		{"fugacity", "--model", "PR78", "--fluid", "methane=1", "-T", "40C"},
		{"batch", "--model", "PR78", "--fluid", "methane=1"},
		{"--cert", "x.pem", "models"},
	} {
		if r := runCLI(t, nil, "", args...); r.code != exitUsage {
			t.Errorf("%v: exit %d, want %d\n%s", args, r.code, exitUsage, r.stderr)
		}
	}
	// A loopback port with nothing listening: UNAVAILABLE, exit 1.
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := lis.Addr().String()
	lis.Close()
	r := runCLI(t, nil, "", "--addr", addr, "--timeout", "5s", "models")
	if r.code != exitFailed || !strings.Contains(r.stderr, "UNAVAILABLE") || !strings.Contains(r.stderr, addr) {
		t.Errorf("unreachable: exit %d\n%s", r.code, r.stderr)
	}
}

// TestAddrFromEnvironment checks that FUGACTL_ADDR is used and that --addr
// wins over it, over loopback TCP against the real server.
func TestAddrFromEnvironment(t *testing.T) {
	addr, _ := tcpServer(t, nil)
	run := func(env string, args ...string) result {
		a := &app{stdin: strings.NewReader(""), getenv: func(k string) string {
			if k == envAddr {
				return env
			}
			return ""
		}}
		var out, errb strings.Builder
		a.stdout, a.stderr = &out, &errb
		code := a.run(args)
		return result{code, out.String(), errb.String()}
	}
	if r := run(addr, "models"); r.code != exitOK || !strings.Contains(r.stdout, "PR78") {
		t.Errorf("FUGACTL_ADDR: exit %d %s", r.code, r.stderr)
	}
	if r := run("127.0.0.1:1", "--addr", addr, "models"); r.code != exitOK {
		t.Errorf("--addr over FUGACTL_ADDR: exit %d %s", r.code, r.stderr)
	}
	// Global flags also work after the command name.
	if r := run("", "models", "--addr", addr, "--json"); r.code != exitOK || !strings.Contains(r.stdout, `"model_version"`) {
		t.Errorf("flags after the command: exit %d %s", r.code, r.stderr)
	}
}

// tcpServer serves the real fugad server on loopback TCP, with TLS when
// cfg is set.
func tcpServer(t *testing.T, cfg *tls.Config) (string, *server.Host) {
	t.Helper()
	reg := prometheus.NewRegistry()
	srv, err := server.New(server.Config{}, nil, reg)
	if err != nil {
		t.Fatal(err)
	}
	host, err := server.NewHost(srv, reg, server.HostOptions{TLS: cfg})
	if err != nil {
		t.Fatal(err)
	}
	lis, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- host.Serve(lis) }()
	t.Cleanup(func() {
		host.Shutdown()
		select {
		case <-done:
		case <-time.After(10 * time.Second):
			t.Error("server did not stop")
		}
	})
	return lis.Addr().String(), host
}

// writePEM writes a PEM block to dir/name.
func writePEM(t *testing.T, dir, name, typ string, der []byte) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, pem.EncodeToMemory(&pem.Block{Type: typ, Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}

// testPKI makes a CA and a certificate for "localhost" signed by it (and,
// with client, a client certificate), in dir.
func testPKI(t *testing.T, dir string) (caFile string, pool *x509.CertPool, serverCert tls.Certificate, clientCert, clientKey string) {
	t.Helper()
	caKey, _ := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	ca := &x509.Certificate{SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "fugactl test CA"}, NotBefore: time.Now().Add(-time.Hour),
		NotAfter: time.Now().Add(time.Hour), IsCA: true, KeyUsage: x509.KeyUsageCertSign, BasicConstraintsValid: true}
	caDER, err := x509.CreateCertificate(rand.Reader, ca, ca, &caKey.PublicKey, caKey)
	if err != nil {
		t.Fatal(err)
	}
	caCert, _ := x509.ParseCertificate(caDER)
	pool = x509.NewCertPool()
	pool.AddCert(caCert)
	caFile = writePEM(t, dir, "ca.pem", "CERTIFICATE", caDER)
	leaf := func(serial int64, usage x509.ExtKeyUsage) ([]byte, *ecdsa.PrivateKey) {
		k, _ := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
		tmpl := &x509.Certificate{SerialNumber: big.NewInt(serial), Subject: pkix.Name{CommonName: "localhost"}, DNSNames: []string{"localhost"},
			NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour), ExtKeyUsage: []x509.ExtKeyUsage{usage}, KeyUsage: x509.KeyUsageDigitalSignature}
		der, err := x509.CreateCertificate(rand.Reader, tmpl, caCert, &k.PublicKey, caKey)
		if err != nil {
			t.Fatal(err)
		}
		return der, k
	}
	sDER, sKey := leaf(2, x509.ExtKeyUsageServerAuth)
	serverCert = tls.Certificate{Certificate: [][]byte{sDER}, PrivateKey: sKey}
	cDER, cKey := leaf(3, x509.ExtKeyUsageClientAuth)
	keyDER, _ := x509.MarshalECPrivateKey(cKey)
	clientCert = writePEM(t, dir, "client.pem", "CERTIFICATE", cDER)
	clientKey = writePEM(t, dir, "client-key.pem", "EC PRIVATE KEY", keyDER)
	return
}

// TestTLS connects over loopback TCP to a real server with mutual TLS:
// with --ca, --cert, --key and --server-name the call succeeds; without the
// CA, without the client certificate, or in plaintext it fails with
// status 1.
func TestTLS(t *testing.T) {
	dir := t.TempDir()
	caFile, pool, sc, cc, ck := testPKI(t, dir)
	addr, _ := tcpServer(t, &tls.Config{Certificates: []tls.Certificate{sc}, ClientAuth: tls.RequireAndVerifyClientCert, ClientCAs: pool, MinVersion: tls.VersionTLS12})
	ok := runCLI(t, nil, "", "--addr", addr, "--ca", caFile, "--cert", cc, "--key", ck, "--server-name", "localhost", "--timeout", "10s", "models")
	if ok.code != exitOK || !strings.Contains(ok.stdout, "SRK") {
		t.Fatalf("mutual TLS: exit %d\n%s", ok.code, ok.stderr)
	}
	for name, args := range map[string][]string{
		"no CA":        {"--tls", "--cert", cc, "--key", ck, "--server-name", "localhost"},
		"no client":    {"--ca", caFile, "--server-name", "localhost"},
		"plaintext":    {},
		"wrong server": {"--ca", caFile, "--cert", cc, "--key", ck, "--server-name", "fugad.kestrel.example"},
	} {
		r := runCLI(t, nil, "", append(append([]string{"--addr", addr, "--timeout", "10s"}, args...), "models")...)
		if r.code != exitFailed || !strings.Contains(r.stderr, codeName(codes.Unavailable)) {
			t.Errorf("%s: exit %d, want 1 with UNAVAILABLE\n%s", name, r.code, r.stderr)
		}
	}
	if r := runCLI(t, nil, "", "--addr", addr, "--ca", filepath.Join(dir, "client-key.pem"), "models"); r.code != exitUsage || !strings.Contains(r.stderr, "no PEM certificate") {
		t.Errorf("bad CA file: exit %d %s", r.code, r.stderr)
	}
}

func TestCodeNames(t *testing.T) {
	// Canonical names of the gRPC status codes (grpc/grpc, doc/statuscodes.md).
	for c, want := range map[codes.Code]string{codes.OK: "OK", codes.Canceled: "CANCELLED", codes.InvalidArgument: "INVALID_ARGUMENT",
		codes.DeadlineExceeded: "DEADLINE_EXCEEDED", codes.ResourceExhausted: "RESOURCE_EXHAUSTED", codes.Unimplemented: "UNIMPLEMENTED",
		codes.Unavailable: "UNAVAILABLE", codes.Unauthenticated: "UNAUTHENTICATED", codes.Code(99): "CODE_99"} {
		if got := codeName(c); got != want {
			t.Errorf("codeName(%d) = %s, want %s", c, got, want)
		}
	}
}
