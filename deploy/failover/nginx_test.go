package failover

import (
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"text/template"
	"time"
)

// findNginx returns the nginx binary: $NGINX, then nginx on PATH, then
// Debian's /usr/sbin/nginx (not on a non-root PATH). Without one the test
// fails under CI=true and is skipped otherwise.
func findNginx(t *testing.T) string {
	t.Helper()
	var candidates []string
	if p := os.Getenv("NGINX"); p != "" {
		candidates = append(candidates, p)
	}
	if p, err := exec.LookPath("nginx"); err == nil {
		candidates = append(candidates, p)
	}
	candidates = append(candidates, "/usr/sbin/nginx")
	for _, p := range candidates {
		if fi, err := os.Stat(p); err == nil && !fi.IsDir() && fi.Mode()&0o111 != 0 {
			return p
		}
	}
	const why = "nginx not found ($NGINX, PATH, /usr/sbin/nginx); on Debian: apt-get install -y nginx"
	if os.Getenv("CI") == "true" {
		t.Fatal(why)
	}
	t.Skip(why)
	return ""
}

// checkGRPCModule fails the test when nginx -V says the gRPC proxy module
// was left out of the build (it is in by default).
func checkGRPCModule(t *testing.T, nginx string) string {
	t.Helper()
	out, err := exec.Command(nginx, "-V").CombinedOutput()
	if err != nil {
		t.Fatalf("%s -V: %v\n%s", nginx, err, out)
	}
	v := string(out)
	if strings.Contains(v, "--without-http_grpc_module") || !strings.Contains(v, "--with-http_v2_module") {
		t.Fatalf("%s lacks the gRPC proxy or HTTP/2 module:\n%s", nginx, v)
	}
	first, _, _ := strings.Cut(v, "\n")
	return first
}

// nginxConfig is the load balancer's configuration. Everything nginx
// writes (pid, logs, temporary files) stays in Dir; it runs in the
// foreground (daemon off) with one worker, under the test's control.
//
//   - grpc_pass to an upstream of the replicas, round robin, with idle
//     HTTP/2 connections kept for reuse (keepalive);
//   - grpc_next_upstream error timeout non_idempotent: a call whose
//     replica refuses the connection or times out is passed to the next
//     replica, at most three tries within 5 s. gRPC calls are POSTs, which
//     nginx passes on after the request was sent only with non_idempotent;
//     fugad's unary methods have no side effects, so that is safe here (it
//     would not be for a method that changes state). Even so, nginx streams
//     gRPC request bodies unbuffered and cannot resend one, so a call in
//     flight on a replica that dies comes back as HTTP 502, which the
//     client sees as UNAVAILABLE and its retry policy resends; the same
//     policy covers UNAVAILABLE answered by fugad itself (load shedding),
//     which arrives as HTTP 200 with grpc-status 14 and which nginx never
//     retries;
//   - max_fails=1 fail_timeout=5s: a replica that failed is left out for
//     5 s before nginx tries it again;
//   - the fugad-upstream response header names the replica that answered,
//     so that the test can attribute every call.
const nginxConfig = `# fugad load-balancer fail-over test; generated, do not edit.
daemon off;
master_process on;
worker_processes 1;
pid {{.Dir}}/nginx.pid;
error_log {{.Dir}}/error.log info;

events {
    worker_connections 1024;
}

http {
    log_format grpc '$remote_addr "$request" $status grpc-status=$sent_trailer_grpc_status '
                    'upstream=$upstream_addr upstream_status=$upstream_status $request_time';

    access_log {{.Dir}}/access.log grpc;
    client_body_temp_path {{.Dir}}/client_body;
    proxy_temp_path {{.Dir}}/proxy;
    fastcgi_temp_path {{.Dir}}/fastcgi;
    uwsgi_temp_path {{.Dir}}/uwsgi;
    scgi_temp_path {{.Dir}}/scgi;

    upstream fugad {
{{- range .Replicas}}
        server {{.}} max_fails=1 fail_timeout=5s;
{{- end}}
        keepalive 16;
    }

    server {
        listen {{.Listen}} http2;

        location / {
            grpc_pass grpc://fugad;
            grpc_connect_timeout 1s;
            grpc_next_upstream error timeout non_idempotent;
            grpc_next_upstream_tries 3;
            grpc_next_upstream_timeout 5s;
            add_header fugad-upstream $upstream_addr always;
        }
    }
}
`

// loadBalancer is a running nginx.
type loadBalancer struct {
	*process
	addr string
	dir  string
}

// startNginx writes the configuration for the replicas into a temporary
// directory, checks it with nginx -t, starts nginx in the foreground and
// waits until it listens.
func startNginx(t *testing.T, nginx string, replicas []*replica) *loadBalancer {
	t.Helper()
	dir := t.TempDir()
	lb := &loadBalancer{addr: freeLoopbackAddr(t), dir: dir}
	var addrs []string
	for _, r := range replicas {
		addrs = append(addrs, r.grpcAddr)
	}
	var buf bytes.Buffer
	tmpl := template.Must(template.New("nginx").Parse(nginxConfig))
	if err := tmpl.Execute(&buf, struct {
		Dir, Listen string
		Replicas    []string
	}{dir, lb.addr, addrs}); err != nil {
		t.Fatal(err)
	}
	conf := filepath.Join(dir, "nginx.conf")
	if err := os.WriteFile(conf, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	// -e sets the error log before the configuration is read, so that nginx
	// never opens the system's log; -p keeps relative paths in dir.
	args := []string{"-p", dir, "-c", conf, "-e", filepath.Join(dir, "error.log")}
	if out, err := exec.Command(nginx, append(args, "-t")...).CombinedOutput(); err != nil {
		t.Fatalf("nginx -t: %v\n%s\nconfiguration:\n%s", err, out, buf.String())
	}
	lb.process = startProcess(t, "nginx", nginx, args...)
	t.Cleanup(func() {
		if t.Failed() {
			for _, f := range []string{"error.log", "access.log"} {
				b, _ := os.ReadFile(filepath.Join(dir, f))
				t.Logf("nginx %s (last 4 KiB):\n%s", f, tail(string(b), 4096))
			}
		}
	})
	deadline := time.Now().Add(10 * time.Second)
	for {
		if c, err := dialTCP(lb.addr); err == nil {
			c.Close()
			return lb
		}
		if !lb.running() {
			t.Fatalf("nginx exited: %s", exitStatus(lb.err))
		}
		if time.Now().After(deadline) {
			t.Fatalf("nginx does not listen on %s after 10 s", lb.addr)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// accessLog is what nginx's access log says about the Flash requests.
type accessLog struct {
	requests int            // requests logged
	retried  int            // requests nginx passed to more than one replica
	byStatus map[string]int // requests by the HTTP status nginx answered
}

// accessLogCounts reads nginx's access log.
func (lb *loadBalancer) accessLogCounts() (accessLog, error) {
	a := accessLog{byStatus: map[string]int{}}
	b, err := os.ReadFile(filepath.Join(lb.dir, "access.log"))
	if err != nil {
		return a, err
	}
	for _, l := range strings.Split(string(b), "\n") {
		if !strings.Contains(l, "/fugad.v1.FugadService/Flash") {
			continue
		}
		a.requests++
		_, rest, ok := strings.Cut(l, `" `)
		if f := strings.Fields(rest); ok && len(f) > 0 {
			a.byStatus[f[0]]++
		}
		_, up, ok := strings.Cut(l, "upstream=")
		if !ok {
			return a, fmt.Errorf("access log line without upstream: %q", l)
		}
		up, _, _ = strings.Cut(up, " upstream_status=")
		if strings.Contains(up, ",") {
			a.retried++
		}
	}
	return a, nil
}
