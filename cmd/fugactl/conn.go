package main

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"fmt"
	"net"
	"os"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// maxResponseBytes bounds a received message. The server's default send
// limit is 16 MiB; a large envelope or batch fits with room to spare.
const maxResponseBytes = 64 << 20

// transportCredentials returns the credentials the TLS flags ask for:
// plaintext without any of them; TLS with the system roots for --tls; TLS
// with the given CA for --ca; and a client certificate for --cert/--key.
func (g *globals) transportCredentials() (credentials.TransportCredentials, error) {
	if !g.tls && g.ca == "" && g.cert == "" && g.key == "" {
		return insecure.NewCredentials(), nil
	}
	cfg := &tls.Config{MinVersion: tls.VersionTLS12, ServerName: g.serverName}
	if g.ca != "" {
		pem, err := os.ReadFile(g.ca)
		if err != nil {
			return nil, usagef("--ca: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, usagef("--ca %s: no PEM certificate found", g.ca)
		}
		cfg.RootCAs = pool
	}
	if (g.cert == "") != (g.key == "") {
		return nil, usagef("--cert and --key go together (mutual TLS needs both)")
	}
	if g.cert != "" {
		pair, err := tls.LoadX509KeyPair(g.cert, g.key)
		if err != nil {
			return nil, usagef("--cert/--key: %w", err)
		}
		cfg.Certificates = []tls.Certificate{pair}
	}
	return credentials.NewTLS(cfg), nil
}

// connect opens a client connection to --addr. The connection is lazy:
// an unreachable server shows as an UNAVAILABLE error of the first call.
func (a *app) connect() (fugadv1.FugadServiceClient, func(), error) {
	if a.g.addr == "" {
		return nil, nil, usagef("--addr is empty")
	}
	creds, err := a.g.transportCredentials()
	if err != nil {
		return nil, nil, err
	}
	opts := []grpc.DialOption{
		grpc.WithTransportCredentials(creds),
		grpc.WithDefaultCallOptions(grpc.MaxCallRecvMsgSize(maxResponseBytes)),
		grpc.WithUserAgent("fugactl"),
	}
	target := a.g.addr
	if a.dialer != nil {
		target = "passthrough:///" + a.g.addr
		opts = append(opts, grpc.WithContextDialer(a.dialer))
	}
	conn, err := grpc.NewClient(target, opts...)
	if err != nil {
		return nil, nil, usagef("--addr %q: %w", a.g.addr, err)
	}
	return fugadv1.NewFugadServiceClient(conn), func() { _ = conn.Close() }, nil
}

// callContext returns the context of one unary call, bounded by --timeout
// (no bound when it is zero or negative).
func (a *app) callContext() (context.Context, context.CancelFunc) {
	if a.g.timeout > 0 {
		return context.WithTimeout(context.Background(), a.g.timeout)
	}
	return context.WithCancel(context.Background())
}

// unary connects to the server, makes one call under the --timeout
// deadline and closes the connection again.
func unary[Resp any](a *app, call func(ctx context.Context, c fugadv1.FugadServiceClient) (Resp, error)) (Resp, error) {
	client, done, err := a.connect()
	if err != nil {
		var zero Resp
		return zero, err
	}
	defer done()
	ctx, cancel := a.callContext()
	defer cancel()
	return call(ctx, client)
}

// dialTarget describes the server for error messages.
func (a *app) dialTarget() string {
	if _, _, err := net.SplitHostPort(a.g.addr); err != nil {
		return fmt.Sprintf("%q (not host:port)", a.g.addr)
	}
	return a.g.addr
}
