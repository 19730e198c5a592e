package thermo_test

import (
	"os/exec"
	"strings"
	"testing"
)

// TestNoServiceDependencies keeps the science free of transport and
// observability libraries: no package under thermo/ may import gRPC,
// protobuf, zap or Prometheus, directly or indirectly.
func TestNoServiceDependencies(t *testing.T) {
	out, err := exec.Command("go", "list", "-deps", "-test", "github.com/fugad/fugad/thermo/...").CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	forbidden := []string{"google.golang.org/grpc", "google.golang.org/protobuf", "go.uber.org/zap", "github.com/prometheus/"}
	for _, dep := range strings.Fields(string(out)) {
		for _, f := range forbidden {
			if strings.HasPrefix(dep, f) {
				t.Errorf("thermo depends on %s", dep)
			}
		}
		if strings.HasPrefix(dep, "github.com/fugad/fugad/") && !strings.HasPrefix(dep, "github.com/fugad/fugad/thermo") {
			t.Errorf("thermo depends on %s, outside thermo/", dep)
		}
	}
}
