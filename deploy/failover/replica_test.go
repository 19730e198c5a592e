package failover

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
)

// repoRoot is the module root, two levels above this package.
func repoRoot(t testing.TB) string {
	t.Helper()
	wd, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	root := filepath.Join(wd, "..", "..")
	if _, err := os.Stat(filepath.Join(root, "go.mod")); err != nil {
		t.Fatalf("module root not found from %s: %v", wd, err)
	}
	return root
}

// built is the fugad binary, built once per test binary.
var built struct {
	once sync.Once
	dir  string
	path string
	err  error
}

// buildFugad builds ./cmd/fugad once into a temporary directory that is
// removed when the test binary exits (see TestMain).
func buildFugad(t testing.TB) string {
	t.Helper()
	root := repoRoot(t)
	built.once.Do(func() {
		dir, err := os.MkdirTemp("", "fugad-failover-bin-")
		if err != nil {
			built.err = err
			return
		}
		built.dir = dir
		built.path = filepath.Join(dir, "fugad")
		cmd := exec.Command("go", "build", "-o", built.path, "./cmd/fugad")
		cmd.Dir = root
		if out, err := cmd.CombinedOutput(); err != nil {
			built.err = fmt.Errorf("go build ./cmd/fugad: %v\n%s", err, out)
		}
	})
	if built.err != nil {
		t.Fatal(built.err)
	}
	return built.path
}

func TestMain(m *testing.M) {
	code := m.Run()
	if built.dir != "" {
		os.RemoveAll(built.dir)
	}
	os.Exit(code)
}

// freeLoopbackAddr returns a loopback address whose port was free a moment
// ago.
func freeLoopbackAddr(t testing.TB) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := l.Addr().String()
	l.Close()
	return addr
}

// logBuffer collects a process's output.
type logBuffer struct {
	mu  sync.Mutex
	buf bytes.Buffer
}

func (b *logBuffer) Write(p []byte) (int, error) {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.Write(p)
}

func (b *logBuffer) String() string {
	b.mu.Lock()
	defer b.mu.Unlock()
	return b.buf.String()
}

// process is a child process under the test's control.
type process struct {
	name   string
	cmd    *exec.Cmd
	out    *logBuffer
	exited chan struct{} // closed when the process has been waited for
	err    error         // Wait's result, valid once exited is closed
	exitAt time.Time
}

// startProcess starts name in its own process group and arranges for the
// whole group to be killed when the test ends.
func startProcess(t testing.TB, label, name string, args ...string) *process {
	t.Helper()
	p := &process{name: label, cmd: exec.Command(name, args...), out: new(logBuffer), exited: make(chan struct{})}
	p.cmd.Stdout, p.cmd.Stderr = p.out, p.out
	p.cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	p.cmd.Env = append(os.Environ(), "GOMAXPROCS="+fmt.Sprint(runtime.GOMAXPROCS(0)))
	if err := p.cmd.Start(); err != nil {
		t.Fatalf("starting %s: %v", label, err)
	}
	go func() {
		p.err = p.cmd.Wait()
		p.exitAt = time.Now()
		close(p.exited)
	}()
	t.Cleanup(func() {
		p.kill()
		if t.Failed() {
			t.Logf("%s output (last 4 KiB):\n%s", label, tail(p.out.String(), 4096))
		}
	})
	return p
}

// signal sends sig to the process itself.
func (p *process) signal(sig syscall.Signal) error { return p.cmd.Process.Signal(sig) }

// kill SIGKILLs the process group unless the process has exited, and waits
// for the process.
func (p *process) kill() {
	select {
	case <-p.exited:
		return
	default:
	}
	_ = syscall.Kill(-p.cmd.Process.Pid, syscall.SIGKILL)
	select {
	case <-p.exited:
	case <-time.After(10 * time.Second):
	}
}

// wait waits up to d for the process to exit and returns its Wait error.
func (p *process) wait(d time.Duration) (error, bool) {
	select {
	case <-p.exited:
		return p.err, true
	case <-time.After(d):
		return nil, false
	}
}

func (p *process) running() bool {
	select {
	case <-p.exited:
		return false
	default:
		return true
	}
}

func tail(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return "…" + s[len(s)-n:]
}

// replica is one fugad server process.
type replica struct {
	*process
	grpcAddr, metricsAddr string
}

// Replica settings. Eight solver slots, as many as the load has workers,
// so that the load is never shed and every UNAVAILABLE the clients see
// comes from fail-over; shedding is covered by the server's own tests.
// The drain delay stands in for the Deployment's preStop sleep: the
// replica keeps answering for that long after SIGTERM, so calls still
// routed to it are served and counted.
const (
	replicaSolveSlots  = 8
	replicaDrainDelay  = 500 * time.Millisecond
	replicaDrainBound  = 10 * time.Second
	replicaStartBudget = 20 * time.Second
)

// startReplica starts a fugad replica on free loopback ports and waits
// until its health service answers SERVING for readiness. A start that
// fails because a port was taken in the meantime is retried with new
// ports, up to three times.
func startReplica(t testing.TB, bin, name string) *replica {
	t.Helper()
	var lastErr error
	for range 3 {
		r := &replica{grpcAddr: freeLoopbackAddr(t), metricsAddr: freeLoopbackAddr(t)}
		r.process = startProcess(t, name, bin,
			"--grpc-addr="+r.grpcAddr,
			"--metrics-addr="+r.metricsAddr,
			"--log-level=info",
			"--reflection=false",
			fmt.Sprintf("--max-concurrent-solves=%d", replicaSolveSlots),
			"--drain-delay="+replicaDrainDelay.String(),
			"--drain-timeout="+replicaDrainBound.String(),
		)
		if lastErr = waitServing(r.grpcAddr, r.process, replicaStartBudget); lastErr == nil {
			return r
		}
		r.kill()
		if !strings.Contains(r.out.String(), "address already in use") {
			break
		}
	}
	t.Fatalf("replica %s did not become ready: %v", name, lastErr)
	return nil
}

// waitServing polls the readiness health check at addr until it answers
// SERVING, p exits, or budget passes.
func waitServing(addr string, p *process, budget time.Duration) error {
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		return err
	}
	defer conn.Close()
	return pollHealth(healthpb.NewHealthClient(conn), "readiness", p, budget)
}

// pollHealth polls a health service until svc is SERVING.
func pollHealth(h healthpb.HealthClient, svc string, p *process, budget time.Duration) error {
	deadline := time.Now().Add(budget)
	for {
		ctx, cancel := context.WithTimeout(context.Background(), time.Second)
		resp, err := h.Check(ctx, &healthpb.HealthCheckRequest{Service: svc})
		cancel()
		if err == nil && resp.GetStatus() == healthpb.HealthCheckResponse_SERVING {
			return nil
		}
		if p != nil && !p.running() {
			return fmt.Errorf("%s exited before serving: %v", p.name, p.err)
		}
		if time.Now().After(deadline) {
			return fmt.Errorf("health %q: status %v, error %v after %v", svc, resp.GetStatus(), err, budget)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// logLine is the part of a fugad JSON log line the tests read.
type logLine struct {
	Msg      string `json:"msg"`
	Graceful *bool  `json:"graceful"`
	Method   string `json:"method"`
	Code     string `json:"code"`
}

// drainReport is what a replica's log says about its shutdown.
type drainReport struct {
	signalled bool // "signal received, shutting down" was logged
	stopped   bool // "stopped" was logged
	graceful  bool // the "stopped" line says graceful
	// okAfterSignal counts the Flash "call" lines with code OK logged after
	// the signal line. The production logger samples (after the first 100
	// lines of a message per second, one in 100), so this is a lower bound.
	okAfterSignal int
}

// readDrain parses a replica's log.
func readDrain(out string) (drainReport, error) {
	var d drainReport
	sc := bufio.NewScanner(strings.NewReader(out))
	sc.Buffer(make([]byte, 0, 64<<10), 1<<20)
	for sc.Scan() {
		line := sc.Bytes()
		if len(line) == 0 || line[0] != '{' {
			continue
		}
		var l logLine
		if err := json.Unmarshal(line, &l); err != nil {
			return d, fmt.Errorf("log line %q: %v", line, err)
		}
		switch {
		case l.Msg == "signal received, shutting down":
			d.signalled = true
		case l.Msg == "stopped":
			d.stopped = true
			d.graceful = l.Graceful != nil && *l.Graceful
		case l.Msg == "call" && d.signalled && l.Code == "OK" && strings.HasSuffix(l.Method, "/Flash"):
			d.okAfterSignal++
		}
	}
	return d, sc.Err()
}

// exitStatus describes a Wait error.
func exitStatus(err error) string {
	var ee *exec.ExitError
	if errors.As(err, &ee) {
		if ws, ok := ee.Sys().(syscall.WaitStatus); ok && ws.Signaled() {
			return "killed by " + ws.Signal().String()
		}
		return fmt.Sprintf("exit status %d", ee.ExitCode())
	}
	if err == nil {
		return "exit status 0"
	}
	return err.Error()
}
