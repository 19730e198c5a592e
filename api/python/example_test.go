package python

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials/insecure"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// debianPython is Debian's interpreter, the one that sees python3-grpcio,
// python3-protobuf and python3-scipy.
const debianPython = "/usr/bin/python3"

// need fails the test under CI=true and skips it otherwise.
func need(t *testing.T, format string, args ...any) {
	t.Helper()
	msg := fmt.Sprintf(format, args...)
	if os.Getenv("CI") == "true" {
		t.Fatal(msg)
	}
	t.Skip(msg)
}

// checkPython checks that Debian's interpreter can import what the example
// needs.
func checkPython(t *testing.T) {
	t.Helper()
	if _, err := os.Stat(debianPython); err != nil {
		need(t, "%s not found (apt-get install -y python3): %v", debianPython, err)
	}
	out, err := exec.Command(debianPython, "-c", "import grpc, google.protobuf, numpy, scipy.optimize").CombinedOutput()
	if err != nil {
		need(t, "%s cannot import the example's packages (apt-get install -y python3-grpcio python3-protobuf python3-scipy): %v\n%s", debianPython, err, out)
	}
}

// TestStubsFresh checks that stubs/ is what generate.sh produces from the
// current .proto files.
func TestStubsFresh(t *testing.T) {
	for _, tool := range []string{"protoc", "grpc_python_plugin"} {
		if _, err := exec.LookPath(tool); err != nil {
			need(t, "%s not found (apt-get install -y protobuf-compiler protobuf-compiler-grpc)", tool)
		}
	}
	out, err := exec.Command("bash", "generate.sh", "--check").CombinedOutput()
	if err != nil {
		t.Fatalf("generate.sh --check: %v\n%s", err, out)
	}
}

// optimum is the example's JSON output (the fields the test reads).
type optimum struct {
	Plant             string    `json:"plant"`
	Temperatures      []float64 `json:"stage_temperatures_k"`
	StockTankPressure float64   `json:"stock_tank_pressure_pa"`
	P1                float64   `json:"inlet_separator_pressure_pa"`
	P2                float64   `json:"low_pressure_separator_pressure_pa"`
	Liquid            float64   `json:"stabilised_liquid_mol_per_mol_feed"`
	Success           bool      `json:"optimiser_success"`
	Calls             int       `json:"flash_batch_calls"`
}

// The example's scenario, repeated here so that the Go client computes the
// same objective independently of the script.
var (
	wellComponents = []string{"nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "isopentane", "n-pentane", "n-hexane", "n-heptane", "n-octane", "n-decane", "n-dodecane"}
	wellStream     = []float64{0.004, 0.012, 0.380, 0.085, 0.070, 0.018, 0.032, 0.015, 0.018, 0.030, 0.050, 0.060, 0.080, 0.146}
	p1Bounds       = [2]float64{1.2e6, 8.0e6}
	p2Bounds       = [2]float64{1.5e5, 1.0e6}
)

const (
	t1, t2, t3 = 320.0, 310.0, 288.15
	p3         = 101325.0
)

// stabilisedLiquid computes the example's objective N(P1, P2) through the
// Go client, one FlashBatch call per stage for all points.
func stabilisedLiquid(ctx context.Context, c fugadv1.FugadServiceClient, points [][2]float64) ([]float64, error) {
	fl := &fugadv1.Fluid{Model: fugadv1.Model_MODEL_PR78}
	for _, id := range wellComponents {
		fl.Components = append(fl.Components, &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: id}})
	}
	n := len(points)
	amount := make([]float64, n)
	feeds := make([][]float64, n)
	for i := range points {
		amount[i], feeds[i] = 1, wellStream
	}
	for stage, temp := range []float64{t1, t2, t3} {
		var live []int
		req := &fugadv1.FlashBatchRequest{Fluid: fl}
		for i := range points {
			if feeds[i] == nil {
				continue
			}
			p := p3
			if stage < 2 {
				p = points[i][stage]
			}
			live = append(live, i)
			req.States = append(req.States, &fugadv1.FlashState{
				MoleFractions: feeds[i],
				Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: temp, PressurePa: p}},
			})
		}
		if len(live) == 0 {
			break
		}
		cctx, cancel := context.WithTimeout(ctx, 10*time.Second)
		resp, err := c.FlashBatch(cctx, req)
		cancel()
		if err != nil {
			return nil, err
		}
		for k, it := range resp.GetItems() {
			i := live[k]
			if it.GetStatus().GetCode() != 0 {
				return nil, fmt.Errorf("stage %d, point %v: %s", stage+1, points[i], it.GetStatus().GetMessage())
			}
			var liquids []*fugadv1.Phase
			for _, ph := range it.GetResult().GetPhases() {
				if ph.GetLabel() == fugadv1.PhaseLabel_PHASE_LABEL_LIQUID {
					liquids = append(liquids, ph)
				}
			}
			switch len(liquids) {
			case 0:
				amount[i], feeds[i] = 0, nil
			case 1:
				amount[i] *= liquids[0].GetAmount()
				feeds[i] = liquids[0].GetMoleFractions()
			default:
				return nil, fmt.Errorf("stage %d, point %v: %d liquid phases", stage+1, points[i], len(liquids))
			}
		}
	}
	return amount, nil
}

// startFugad builds and starts a fugad server on a loopback port and waits
// until it is ready; it is killed when the test ends.
func startFugad(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	bin := filepath.Join(dir, "fugad")
	build := exec.Command("go", "build", "-o", bin, "./cmd/fugad")
	build.Dir = filepath.Join("..", "..")
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("go build ./cmd/fugad: %v\n%s", err, out)
	}
	free := func() string {
		l, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			t.Fatal(err)
		}
		defer l.Close()
		return l.Addr().String()
	}
	addr := free()
	cmd := exec.Command(bin, "--grpc-addr="+addr, "--metrics-addr="+free(), "--log-level=warn")
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	exited := make(chan struct{})
	go func() { _ = cmd.Wait(); close(exited) }()
	t.Cleanup(func() {
		_ = cmd.Process.Kill()
		<-exited
		if t.Failed() {
			t.Logf("fugad output:\n%s", out.String())
		}
	})
	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	h := healthpb.NewHealthClient(conn)
	deadline := time.Now().Add(20 * time.Second)
	for {
		ctx, cancel := context.WithTimeout(context.Background(), time.Second)
		resp, err := h.Check(ctx, &healthpb.HealthCheckRequest{Service: "readiness"})
		cancel()
		if err == nil && resp.GetStatus() == healthpb.HealthCheckResponse_SERVING {
			return addr
		}
		select {
		case <-exited:
			t.Fatalf("fugad exited before serving")
		default:
		}
		if time.Now().After(deadline) {
			t.Fatalf("fugad not ready after 20 s: %v", err)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// TestSeparatorOptimiser runs examples/separator_optimiser.py with Debian's
// interpreter against a fugad server on loopback and checks its optimum
// with the Go client: the objective at the returned pressures agrees with
// the script's within 1e-9 relative (the server is deterministic, so the
// two clients send the same states and get the same numbers), the
// pressures are inside the bounds, and moving either pressure by ±1 %
// does not raise the objective.
func TestSeparatorOptimiser(t *testing.T) {
	checkPython(t)
	addr := startFugad(t)

	outFile := filepath.Join(t.TempDir(), "optimum.json")
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, debianPython, filepath.Join("examples", "separator_optimiser.py"),
		"--target", addr, "--output", outFile, "--deadline", "20")
	cmd.Env = append(os.Environ(), "PYTHONDONTWRITEBYTECODE=1")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("separator_optimiser.py: %v\n%s", err, out)
	}
	t.Logf("separator_optimiser.py:\n%s", strings.TrimSpace(string(out)))
	b, err := os.ReadFile(outFile)
	if err != nil {
		t.Fatal(err)
	}
	var opt optimum
	if err := json.Unmarshal(b, &opt); err != nil {
		t.Fatalf("optimum JSON: %v\n%s", err, b)
	}
	if !opt.Success {
		t.Errorf("optimiser did not report success")
	}
	if want := []float64{t1, t2, t3}; fmt.Sprint(opt.Temperatures) != fmt.Sprint(want) || opt.StockTankPressure != p3 {
		t.Fatalf("script's stage conditions %v K, stock tank %g Pa; the test assumes %v K, %g Pa", opt.Temperatures, opt.StockTankPressure, want, p3)
	}
	// Strictly inside the bounds with room for the ±1 % probes.
	if !(opt.P1 > p1Bounds[0]*1.01 && opt.P1 < p1Bounds[1]/1.01) || !(opt.P2 > p2Bounds[0]*1.01 && opt.P2 < p2Bounds[1]/1.01) {
		t.Fatalf("optimum P1 = %g Pa, P2 = %g Pa is on or next to a bound %v, %v", opt.P1, opt.P2, p1Bounds, p2Bounds)
	}

	conn, err := grpc.NewClient(addr, grpc.WithTransportCredentials(insecure.NewCredentials()))
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	points := [][2]float64{
		{opt.P1, opt.P2},
		{opt.P1 * 1.01, opt.P2}, {opt.P1 * 0.99, opt.P2},
		{opt.P1, opt.P2 * 1.01}, {opt.P1, opt.P2 * 0.99},
	}
	n, err := stabilisedLiquid(ctx, fugadv1.NewFugadServiceClient(conn), points)
	if err != nil {
		t.Fatal(err)
	}
	if rel := math.Abs(n[0]-opt.Liquid) / math.Abs(n[0]); !(rel <= 1e-9) {
		t.Errorf("objective at the optimum: script %.17g, Go client %.17g (relative difference %.3g > 1e-9)", opt.Liquid, n[0], rel)
	}
	for k, p := range points[1:] {
		if n[k+1] > n[0] {
			t.Errorf("objective at P1 = %g Pa, P2 = %g Pa is %.12g, above the optimum's %.12g: not a local maximum", p[0], p[1], n[k+1], n[0])
		}
	}
	t.Logf("optimum %s: P1 = %.6g Pa, P2 = %.6g Pa, N = %.12g mol/mol; at ±1%%: P1 %.3g/%.3g, P2 %.3g/%.3g below (relative)",
		opt.Plant, opt.P1, opt.P2, n[0],
		(n[0]-n[1])/n[0], (n[0]-n[2])/n[0], (n[0]-n[3])/n[0], (n[0]-n[4])/n[0])
}
