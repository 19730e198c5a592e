// Package failover tests that fugad replicas behind a load balancer lose no
// call and give no wrong answer while replicas die or drain.
//
// # What the tests do
//
// The fugad binary is built once with `go build ./cmd/fugad` into a
// temporary directory, and three replicas are started on free loopback
// ports, each with its own metrics port. Eight workers then send a bounded
// number of T–P Flash calls through a balancer, with the client retry
// policy of clientServiceConfig (retry on UNAVAILABLE only, five attempts,
// exponential backoff):
//
//   - TestNginxFailover puts nginx in front (grpc_pass to an upstream of the
//     three replicas, retrying the next replica on connection errors and
//     timeouts); nginx runs in the foreground under the test with its own
//     configuration, pid, log and temporary paths in a temporary directory.
//   - TestClientRoundRobinFailover needs no proxy: the client resolves the
//     three addresses with a manual resolver and spreads calls with the
//     round_robin policy.
//
// Part-way through, one replica is killed with SIGKILL and another is sent
// SIGTERM. Every answer is checked against the same flash computed in the
// test process with package thermo/flash: the same phases with the same
// labels, and phase amounts, compositions, temperature, pressure and
// vapour fraction within 1e-12 relative. Byte equality with the in-process
// result is not the test, because the wire result also carries properties
// and a solver report the in-process flash computes separately; instead,
// every answer for one state must be byte-identical to the first answer
// for that state apart from SolverReport.from_cache, whichever replica and
// path produced it. The SIGTERMed replica must exit with status 0 after a
// graceful drain (its "stopped" log line says graceful), and the calls it
// completed after the signal are counted and must all be correct.
//
// One failure is not the balancer's to prevent: a call whose replica is
// killed after sending the response headers but before the trailers. gRPC
// retry policies never retry a call once headers have arrived, and nginx
// resets such a stream (INTERNAL). Flash has no side effects, so the load
// retries such a call once itself, only when it was in flight at the
// SIGKILL, and logs each one; every other failure fails the test.
//
// # Bounds
//
// Traffic goes to 127.0.0.1 only. The run stops after a fixed number of
// calls once the fail-over events are over, with a hard cap on calls and on
// wall time; every process the tests start is killed in t.Cleanup, also
// when a test fails.
//
// # Tools
//
// TestNginxFailover needs nginx with the gRPC proxy module (Debian 12:
// `apt-get install -y nginx`, whose nginx includes it). It is looked up as
// $NGINX, then on PATH, then as /usr/sbin/nginx. With the environment
// variable CI=true a missing nginx fails the test; otherwise the test is
// skipped with the reason.
package failover
