package failover

import (
	"context"
	"net"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/credentials/insecure"
	_ "google.golang.org/grpc/health" // registers client-side health checking
	healthpb "google.golang.org/grpc/health/grpc_health_v1"
	"google.golang.org/grpc/resolver"
	"google.golang.org/grpc/resolver/manual"
	"google.golang.org/grpc/status"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

func dialTCP(addr string) (net.Conn, error) { return net.DialTimeout("tcp", addr, time.Second) }

// startReplicas builds fugad and starts three replicas.
func startReplicas(t *testing.T) []*replica {
	t.Helper()
	bin := buildFugad(t)
	return []*replica{
		startReplica(t, bin, "replica-a"),
		startReplica(t, bin, "replica-b"),
		startReplica(t, bin, "replica-c"),
	}
}

// probeFlash sends one Flash call and fails the test with a clear message
// when the server cannot flash at all, before any replica is disturbed.
func probeFlash(t *testing.T, conn *grpc.ClientConn, s *refState) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	resp, err := fugadv1.NewFugadServiceClient(conn).Flash(ctx, s.request(true))
	if status.Code(err) == codes.Unimplemented {
		t.Fatalf("Flash answers UNIMPLEMENTED: this server build has no T–P flash, so there is nothing to fail over: %v", err)
	}
	if err != nil {
		t.Fatalf("Flash before any fail-over: %v", err)
	}
	if err := s.check(resp.GetResult()); err != nil {
		t.Fatalf("Flash before any fail-over: %v", err)
	}
}

// TestNginxFailover sends the load through nginx to three replicas, kills
// one with SIGKILL and sends SIGTERM to another mid-run, and checks that no
// call failed or was answered wrongly and that the SIGTERMed replica
// drained (see the package documentation).
func TestNginxFailover(t *testing.T) {
	nginx := findNginx(t)
	version := checkGRPCModule(t, nginx)
	states := loadStates(t)
	replicas := startReplicas(t)
	lb := startNginx(t, nginx, replicas)
	t.Logf("%s on %s in front of %s, %s, %s", version, lb.addr, replicas[0].grpcAddr, replicas[1].grpcAddr, replicas[2].grpcAddr)

	attempts := new(attemptCounter)
	conn, err := grpc.NewClient(lb.addr,
		grpc.WithTransportCredentials(insecure.NewCredentials()),
		grpc.WithDefaultServiceConfig(serviceConfig("pick_first", "")),
		grpc.WithStatsHandler(attempts))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()

	// nginx proxies the health service of the replicas.
	h := healthpb.NewHealthClient(conn)
	for _, svc := range []string{"", "readiness", "liveness"} {
		if err := pollHealth(h, svc, lb.process, 10*time.Second); err != nil {
			t.Fatalf("health through nginx: %v", err)
		}
	}
	probeFlash(t, conn, states[0])
	attempts.reset()

	run := runFailoverLoad(t, conn, attempts, states, replicas)
	run.verify(t, states, true)
	al, err := lb.accessLogCounts()
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("nginx: %d Flash requests logged (by HTTP status: %v), %d passed to a second replica after an error", al.requests, al.byStatus, al.retried)
	if al.retried == 0 {
		t.Errorf("nginx passed no request to a second replica, so its fail-over was not exercised")
	}
}

// TestClientRoundRobinFailover spreads the same load over the three
// replicas from the client with the round_robin policy and a manual
// resolver (no proxy; dns:/// cannot list several loopback ports), with
// client-side health checking on the readiness service, and applies the
// same events and checks as TestNginxFailover.
func TestClientRoundRobinFailover(t *testing.T) {
	states := loadStates(t)
	replicas := startReplicas(t)

	rb := manual.NewBuilderWithScheme("fugad-replicas")
	var addrs []resolver.Address
	for _, r := range replicas {
		addrs = append(addrs, resolver.Address{Addr: r.grpcAddr})
	}
	rb.InitialState(resolver.State{Addresses: addrs})
	attempts := new(attemptCounter)
	conn, err := grpc.NewClient(rb.Scheme()+":///fugad",
		grpc.WithResolvers(rb),
		grpc.WithTransportCredentials(insecure.NewCredentials()),
		grpc.WithDefaultServiceConfig(serviceConfig("round_robin", "readiness")),
		grpc.WithStatsHandler(attempts))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	probeFlash(t, conn, states[0])
	attempts.reset()

	run := runFailoverLoad(t, conn, attempts, states, replicas)
	// Client-side health checking takes the SIGTERMed replica out of the
	// rotation as soon as its readiness turns NOT_SERVING, so it may answer
	// no call after the signal; the counts are logged.
	run.verify(t, states, false)
}
