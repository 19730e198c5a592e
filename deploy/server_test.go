package deploy

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"io"
	"net"
	"net/http"
	"os/exec"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
)

// freeLoopbackAddr returns a loopback address with a port that was free a
// moment ago.
func freeLoopbackAddr(t *testing.T) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := l.Addr().String()
	l.Close()
	return addr
}

// syncBuffer collects a process's output for failure messages.
type syncBuffer struct {
	mu  sync.Mutex
	buf bytes.Buffer
}

func (b *syncBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.Write(p)
}

func (b *syncBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.String()
}

// TestServerRunsWithDeploymentArgs starts the binary the Dockerfile builds
// with the Deployment's arguments and environment, its listen addresses
// moved to loopback, and checks what the probes and the scrape job rely on:
// the health service answers SERVING for "", readiness and liveness on the
// gRPC port; /metrics on the metrics port exports the families the alerts
// and dashboard use, with the expected types; and SIGTERM stops the process
// within the drain timeout.
func TestServerRunsWithDeploymentArgs(t *testing.T) {
	bin := buildServer(t)
	d := one(t, "Deployment", loadManifests(t).Deployments)
	c := fugadContainer(t, d)
	grpcAddr, metricsAddr := freeLoopbackAddr(t), freeLoopbackAddr(t)
	var args []string
	for _, a := range c.Args {
		switch {
		case strings.HasPrefix(a, "--grpc-addr="):
			a = "--grpc-addr=" + grpcAddr
		case strings.HasPrefix(a, "--metrics-addr="):
			a = "--metrics-addr=" + metricsAddr
		}
		args = append(args, a)
	}
	for flag, addr := range map[string]string{"grpc-addr": grpcAddr, "metrics-addr": metricsAddr} {
		if _, ok := containerArg(args, flag); !ok {
			args = append(args, "--"+flag+"="+addr)
		}
	}
	drainArg, _ := containerArg(args, "drain-timeout")
	drain, err := time.ParseDuration(drainArg)
	if err != nil {
		t.Fatalf("--drain-timeout=%q: %v", drainArg, err)
	}

	cmd := exec.Command(bin, args...)
	cmd.Env = []string{"PATH=/usr/bin:/bin"}
	for _, e := range c.Env {
		cmd.Env = append(cmd.Env, e.Name+"="+e.Value)
	}
	out := new(syncBuffer)
	cmd.Stdout, cmd.Stderr = out, out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	exited := make(chan error, 1)
	go func() { exited <- cmd.Wait() }()
	stopped := false
	defer func() {
		if !stopped {
			cmd.Process.Kill()
			<-exited
		}
		if t.Failed() {
			t.Logf("fugad %q output:\n%s", args, out.String())
		}
	}()

	conn, err := grpc.NewClient(grpcAddr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	health := healthpb.NewHealthClient(conn)
	// The startup probe allows a minute; locally the server gets 20 s.
	for _, svc := range []string{"", readinessService, livenessService} {
		deadline := time.Now().Add(20 * time.Second)
		for {
			ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
			resp, err := health.Check(ctx, &healthpb.HealthCheckRequest{Service: svc})
			cancel()
			if err == nil && resp.Status == healthpb.HealthCheckResponse_SERVING {
				break
			}
			select {
			case err := <-exited:
				stopped = true
				t.Fatalf("fugad exited before serving: %v", err)
			default:
			}
			if time.Now().After(deadline) {
				t.Fatalf("health check %q: status %v, error %v", svc, resp.GetStatus(), err)
			}
			time.Sleep(100 * time.Millisecond)
		}
	}

	resp, err := (&http.Client{Timeout: 5 * time.Second}).Get("http://" + metricsAddr + "/metrics")
	if err != nil {
		t.Fatalf("scrape: %v", err)
	}
	body, err := io.ReadAll(resp.Body)
	resp.Body.Close()
	if err != nil || resp.StatusCode != http.StatusOK {
		t.Fatalf("scrape: status %d, %v", resp.StatusCode, err)
	}
	types, err := exposedTypes(body)
	if err != nil {
		t.Fatal(err)
	}
	for name, typ := range types {
		m, known := exportedMetrics[name]
		switch {
		case strings.HasPrefix(name, "fugad_") && !known:
			t.Errorf("server exports %s, which the alerts, dashboard and exportedMetrics do not know", name)
		case known && string(m.Kind) != typ:
			t.Errorf("server exports %s as a %s, the alerts and dashboard read it as a %s", name, typ, m.Kind)
		}
	}
	// Families without labels exist from the start; vectors appear once
	// observed, so only these can be required of an idle server.
	for name, m := range exportedMetrics {
		if len(m.Labels) == 0 && m.Kind != histogram {
			if _, ok := types[name]; !ok {
				t.Errorf("an idle server does not export %s", name)
			}
		}
	}

	// SIGTERM: drain, then exit well within the grace period.
	if err := cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	select {
	case err := <-exited:
		stopped = true
		if err != nil {
			t.Errorf("fugad exited with %v after SIGTERM, want status 0", err)
		}
	case <-time.After(drain + 5*time.Second):
		t.Errorf("fugad still running %v after SIGTERM with --drain-timeout=%v", drain+5*time.Second, drain)
	}
}

// exposedTypes reads the # TYPE lines of a Prometheus text exposition.
func exposedTypes(body []byte) (map[string]string, error) {
	types := map[string]string{}
	sc := bufio.NewScanner(bytes.NewReader(body))
	sc.Buffer(make([]byte, 0, 64<<10), 1<<20)
	for sc.Scan() {
		f := strings.Fields(sc.Text())
		if len(f) == 4 && f[0] == "#" && f[1] == "TYPE" {
			types[f[2]] = f[3]
		}
	}
	if len(types) == 0 {
		return nil, fmt.Errorf("no # TYPE lines in the exposition (%d bytes)", len(body))
	}
	return types, sc.Err()
}

func TestExposedTypes(t *testing.T) {
	got, err := exposedTypes([]byte("# HELP a_total x\n# TYPE a_total counter\na_total 1\n# TYPE b histogram\nb_bucket{le=\"+Inf\"} 0\n"))
	if err != nil || len(got) != 2 || got["a_total"] != "counter" || got["b"] != "histogram" {
		t.Errorf("exposedTypes = %v, %v", got, err)
	}
	if _, err := exposedTypes([]byte("a_total 1\n")); err == nil {
		t.Error("an exposition without # TYPE lines was accepted")
	}
}
