package failover

import (
	"context"
	"fmt"
	"sort"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/peer"
	"google.golang.org/grpc/stats"
	"google.golang.org/grpc/status"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// clientServiceConfig is the gRPC service config of the test clients:
// every FugadService method gets a 10 s deadline and is retried on
// UNAVAILABLE only, at most five attempts, with exponential backoff from
// 50 ms to 0.5 s (the policy deploy/README.md recommends, with more
// attempts because two of three replicas go away). %s is the
// load-balancing policy.
const clientServiceConfig = `{
  "loadBalancingConfig": [{%q: {}}],
  %s
  "methodConfig": [{
    "name": [{"service": "fugad.v1.FugadService"}],
    "timeout": "10s",
    "retryPolicy": {
      "maxAttempts": 5,
      "initialBackoff": "0.05s",
      "maxBackoff": "0.5s",
      "backoffMultiplier": 2,
      "retryableStatusCodes": ["UNAVAILABLE"]
    }
  }]
}`

// serviceConfig returns clientServiceConfig for policy, with client-side
// health checking of healthService when it is not empty.
func serviceConfig(policy, healthService string) string {
	hc := ""
	if healthService != "" {
		hc = fmt.Sprintf(`"healthCheckConfig": {"serviceName": %q},`, healthService)
	}
	return fmt.Sprintf(clientServiceConfig, policy, hc)
}

// upstreamHeader is the response header nginx adds with the address of the
// replica that answered (the last of $upstream_addr's list).
const upstreamHeader = "fugad-upstream"

// attemptCounter counts the client's call attempts (the first try and
// every retry, transparent ones included) and the status codes of failed
// attempts, through the stats handler API.
type attemptCounter struct {
	n      atomic.Int64
	mu     sync.Mutex
	failed map[codes.Code]int
}

// reset clears the counts.
func (a *attemptCounter) reset() {
	a.mu.Lock()
	defer a.mu.Unlock()
	a.n.Store(0)
	a.failed = nil
}

// failures returns the failed attempts by status code, as text.
func (a *attemptCounter) failures() string {
	a.mu.Lock()
	defer a.mu.Unlock()
	if len(a.failed) == 0 {
		return "none"
	}
	var parts []string
	for c, n := range a.failed {
		parts = append(parts, fmt.Sprintf("%v %d", c, n))
	}
	sort.Strings(parts)
	return strings.Join(parts, ", ")
}

func (a *attemptCounter) TagRPC(ctx context.Context, _ *stats.RPCTagInfo) context.Context {
	return ctx
}

func (a *attemptCounter) HandleRPC(_ context.Context, s stats.RPCStats) {
	switch e := s.(type) {
	case *stats.Begin:
		if e.IsClient() {
			a.n.Add(1)
		}
	case *stats.End:
		if e.IsClient() && e.Error != nil {
			a.mu.Lock()
			if a.failed == nil {
				a.failed = map[codes.Code]int{}
			}
			a.failed[status.Code(e.Error)]++
			a.mu.Unlock()
		}
	}
}

func (a *attemptCounter) TagConn(ctx context.Context, _ *stats.ConnTagInfo) context.Context {
	return ctx
}

func (a *attemptCounter) HandleConn(context.Context, stats.ConnStats) {}

// Load bounds. The run ends loadTail calls after the fail-over events are
// over, and in any case after loadMaxCalls calls or loadMaxWall.
const (
	loadWorkers  = 8
	loadKillAt   = 600 // completed calls before the SIGKILL
	loadTermAt   = 1200
	loadTail     = 600
	loadMaxCalls = 40000
	loadMaxWall  = 90 * time.Second
)

// callRecord is what one call did.
type callRecord struct {
	state      int
	start, end time.Time
	server     string // address of the replica that answered
	result     *fugadv1.FlashResult
	err        error
	// callerRetried is the error of a first try that the SIGKILL broke
	// after its response headers had arrived (see brokenBySIGKILL).
	callerRetried error
}

// brokenBySIGKILL reports whether err is what a call gets when the replica
// serving it is killed after sending its response headers but before the
// trailers: nginx resets the stream (INTERNAL, "RST_STREAM with error
// code: INTERNAL_ERROR"), a direct connection breaks (UNAVAILABLE). gRPC
// retry policies cannot retry such a call, because receiving headers
// commits it. Only calls started before the SIGKILL and failed before the
// SIGTERM qualify; any other failure counts as a failure.
func brokenBySIGKILL(err error, start time.Time, killNano, termNano int64) bool {
	if killNano == 0 || start.UnixNano() >= killNano || termNano != 0 {
		return false
	}
	switch status.Code(err) {
	case codes.Unavailable:
		return true
	case codes.Internal:
		return strings.Contains(err.Error(), "RST_STREAM")
	}
	return false
}

// failoverRun is the outcome of a load run with its events.
type failoverRun struct {
	calls            []callRecord
	killTime         time.Time
	termTime         time.Time
	killed, termed   *replica
	attempts         int64
	failedAttempts   string
	terminatedStatus error
	terminatedLog    drainReport
}

// runFailoverLoad drives the load through conn while SIGKILLing
// replicas[0] after loadKillAt calls and SIGTERMing replicas[1] after
// loadTermAt calls, then waits for the SIGTERMed replica to exit and
// sends loadTail more calls.
func runFailoverLoad(t *testing.T, conn *grpc.ClientConn, attempts *attemptCounter, states []*refState, replicas []*replica) *failoverRun {
	t.Helper()
	client := fugadv1.NewFugadServiceClient(conn)
	ctx, cancel := context.WithTimeout(context.Background(), loadMaxWall)
	defer cancel()

	run := &failoverRun{calls: make([]callRecord, loadMaxCalls), killed: replicas[0], termed: replicas[1]}
	var (
		issued, completed  atomic.Int64
		killNano, termNano atomic.Int64 // when the signals were sent, 0 before
		stopAt             atomic.Int64
		wg                 sync.WaitGroup
	)
	stopAt.Store(loadMaxCalls)
	for range loadWorkers {
		wg.Go(func() {
			for ctx.Err() == nil {
				i := issued.Add(1) - 1
				if i >= stopAt.Load() {
					return
				}
				k := int(i) % len(states)
				rec := &run.calls[i]
				rec.state = k
				var (
					hdr metadata.MD
					p   peer.Peer
				)
				rec.start = time.Now()
				call := func() error {
					resp, err := client.Flash(ctx, states[k].request(i%2 == 1), grpc.Header(&hdr), grpc.Peer(&p))
					rec.result = resp.GetResult()
					return err
				}
				err := call()
				if err != nil && brokenBySIGKILL(err, rec.start, killNano.Load(), termNano.Load()) {
					// The policy cannot retry a call whose response headers
					// had arrived; Flash has no side effects, so the caller
					// does, once.
					rec.callerRetried = err
					hdr, p = nil, peer.Peer{}
					err = call()
				}
				rec.end = time.Now()
				rec.err = err
				if v := hdr.Get(upstreamHeader); len(v) > 0 {
					addrs := strings.Split(v[len(v)-1], ",")
					rec.server = strings.TrimSpace(addrs[len(addrs)-1])
				} else if p.Addr != nil {
					rec.server = p.Addr.String()
				}
				completed.Add(1)
			}
		})
	}

	// The events, triggered by the count of completed calls.
	waitCompleted := func(n int64) bool {
		for completed.Load() < n {
			if ctx.Err() != nil || issued.Load() >= loadMaxCalls {
				return false
			}
			time.Sleep(time.Millisecond)
		}
		return true
	}
	events := func() error {
		if !waitCompleted(loadKillAt) {
			return fmt.Errorf("load ended after %d calls, before the SIGKILL", completed.Load())
		}
		run.killTime = time.Now()
		killNano.Store(run.killTime.UnixNano())
		if err := run.killed.signal(syscall.SIGKILL); err != nil {
			return err
		}
		if !waitCompleted(loadTermAt) {
			return fmt.Errorf("load ended after %d calls, before the SIGTERM", completed.Load())
		}
		run.termTime = time.Now()
		termNano.Store(run.termTime.UnixNano())
		if err := run.termed.signal(syscall.SIGTERM); err != nil {
			return err
		}
		err, ok := run.termed.wait(replicaDrainDelay + replicaDrainBound + 10*time.Second)
		if !ok {
			return fmt.Errorf("SIGTERMed replica %s still running %v after the signal", run.termed.name, time.Since(run.termTime))
		}
		run.terminatedStatus = err
		if _, ok := run.killed.wait(10 * time.Second); !ok {
			return fmt.Errorf("SIGKILLed replica %s still running", run.killed.name)
		}
		stopAt.Store(max(issued.Load(), completed.Load()+loadTail))
		return nil
	}
	evErr := events()
	if evErr != nil {
		cancel()
	}
	wg.Wait()
	if evErr != nil {
		t.Fatal(evErr)
	}
	if ctx.Err() != nil {
		t.Fatalf("load did not finish within %v (%d calls completed)", loadMaxWall, completed.Load())
	}
	run.calls = run.calls[:min(issued.Load(), stopAt.Load())]
	run.attempts = attempts.n.Load()
	run.failedAttempts = attempts.failures()
	d, err := readDrain(run.termed.out.String())
	if err != nil {
		t.Fatal(err)
	}
	run.terminatedLog = d
	return run
}

// verify checks every call and the drain, and logs the counts.
// requireServedAfterTerm demands that the SIGTERMed replica answered
// calls after the signal (true behind a proxy without health checks).
func (run *failoverRun) verify(t *testing.T, states []*refState, requireServedAfterTerm bool) {
	t.Helper()
	var (
		failed, wrong, unattributed int
		perServer                   = map[string]int{}
		termAfter, termInFlight     int
		killedAfter, callerRetried  int
	)
	for i := range run.calls {
		c := &run.calls[i]
		if c.callerRetried != nil {
			callerRetried++
			t.Logf("call %d was in flight on the SIGKILLed replica past its response headers and was retried by the caller: %v", i, c.callerRetried)
		}
		if c.err != nil {
			if failed < 5 {
				t.Errorf("call %d (state %d, %v after start) failed: %v", i, c.state, c.end.Sub(c.start), c.err)
			}
			failed++
			continue
		}
		s := states[c.state]
		if err := s.check(c.result); err != nil {
			if wrong < 5 {
				t.Errorf("call %d answered by %s: %v", i, c.server, err)
			}
			wrong++
			continue
		}
		b, err := canonical(c.result)
		if err != nil {
			t.Fatal(err)
		}
		if s.first == nil {
			s.first = b
		} else if string(b) != string(s.first) {
			if wrong < 5 {
				t.Errorf("call %d answered by %s: bytes differ from the first answer for state %d (%g K, %g Pa)", i, c.server, c.state, s.T, s.P)
			}
			wrong++
			continue
		}
		if c.server == "" {
			unattributed++
		}
		perServer[c.server]++
		switch c.server {
		case run.termed.grpcAddr:
			if c.end.After(run.termTime) {
				termAfter++
				if c.start.Before(run.termTime) {
					termInFlight++
				}
			}
		case run.killed.grpcAddr:
			if c.start.After(run.killTime) {
				killedAfter++
			}
		}
	}
	if failed > 0 || wrong > 0 {
		t.Errorf("%d of %d calls failed, %d answered wrongly", failed, len(run.calls), wrong)
	}
	if unattributed > 0 {
		t.Errorf("%d calls carry no replica address", unattributed)
	}
	if killedAfter > 0 {
		t.Errorf("%d calls started after the SIGKILL were answered by the killed replica %s", killedAfter, run.killed.grpcAddr)
	}
	if perServer[run.killed.grpcAddr] == 0 || perServer[run.termed.grpcAddr] == 0 {
		t.Errorf("the replicas that went away answered no calls before (per replica: %v): the load did not reach them", perServer)
	}
	if run.terminatedStatus != nil {
		t.Errorf("SIGTERMed replica %s: %s, want exit status 0", run.termed.name, exitStatus(run.terminatedStatus))
	}
	if d := run.terminatedLog; !d.signalled || !d.stopped || !d.graceful {
		t.Errorf("SIGTERMed replica %s log: signal received %v, stopped %v, graceful %v; want all true", run.termed.name, d.signalled, d.stopped, d.graceful)
	}
	if requireServedAfterTerm && termAfter == 0 {
		t.Errorf("SIGTERMed replica %s answered no call after the signal; the drain was not exercised", run.termed.name)
	}

	addrs := make([]string, 0, len(perServer))
	for a := range perServer {
		addrs = append(addrs, a)
	}
	sort.Strings(addrs)
	var dist []string
	for _, a := range addrs {
		role := "survivor"
		switch a {
		case run.killed.grpcAddr:
			role = "SIGKILLed"
		case run.termed.grpcAddr:
			role = "SIGTERMed"
		}
		dist = append(dist, fmt.Sprintf("%s (%s) %d", a, role, perServer[a]))
	}
	wall := run.calls[len(run.calls)-1].end.Sub(run.calls[0].start)
	t.Logf("%d calls by %d workers in %v, %d failed, %d wrong; %d attempts (%d retries by the client; failed attempts by code: %s)",
		len(run.calls), loadWorkers, wall.Round(time.Millisecond), failed, wrong, run.attempts, run.attempts-int64(len(run.calls)), run.failedAttempts)
	t.Logf("answered per replica: %s; %d calls broken by the SIGKILL after their response headers, retried by the caller", strings.Join(dist, ", "), callerRetried)
	t.Logf("SIGTERMed replica: %d calls answered after the signal (%d of them in flight when it was sent), %d OK Flash log lines after it (sampled: a lower bound), %s, graceful %v, exit %v after the signal",
		termAfter, termInFlight, run.terminatedLog.okAfterSignal, exitStatus(run.terminatedStatus), run.terminatedLog.graceful, run.termed.exitAt.Sub(run.termTime).Round(time.Millisecond))
}
