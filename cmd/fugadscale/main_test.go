package main

import (
	"bytes"
	"context"
	"math"
	"strings"
	"testing"
)

// TestScaleTable runs the measurement with one timed call per cell and
// checks the table: one row per size, states of the asked phase counts,
// ln φ counts that make sense, and pseudo-components where the library
// runs out.
func TestScaleTable(t *testing.T) {
	var stderr bytes.Buffer
	cfg, err := parseConfig([]string{"--sizes", "2,10,40", "--iterations", "1", "--warmup", "0"}, &stderr)
	if err != nil {
		t.Fatalf("%v: %s", err, stderr.String())
	}
	rows, err := measureAll(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 3 {
		t.Fatalf("%d rows", len(rows))
	}
	for _, r := range rows {
		if r.flashNA != "" || r.singlePhaseMissing {
			t.Errorf("n = %d: flashes missing: %q", r.n, r.flashNA)
			continue
		}
		if !(r.beta2 > 0 && r.beta2 < 1) || r.t1 <= r.t2 {
			t.Errorf("n = %d: two-phase state %g K (β %g), single-phase %g K", r.n, r.t2, r.beta2, r.t1)
		}
		// A single-phase answer needs only the stability test; a two-phase
		// one adds the split, and a warm start saves part of it.
		if !(r.flash1.evals >= 1 && r.flash2.evals > r.flash1.evals && r.warm2.evals < r.flash2.evals) {
			t.Errorf("n = %d: ln φ evaluations 1-phase %g, 2-phase %g, warm %g", r.n, r.flash1.evals, r.flash2.evals, r.warm2.evals)
		}
		// Times are measured, not asserted (one call on a shared machine
		// says nothing about their order); they must only exist.
		if r.lnPhi.perOp <= 0 || r.flash2.perOp <= 0 {
			t.Errorf("n = %d: ln φ %v, flash %v", r.n, r.lnPhi.perOp, r.flash2.perOp)
		}
		if r.envNA == "" && (r.envPoints < 3 || r.env.evals < 1) {
			t.Errorf("n = %d: envelope of %d points, %g evaluations", r.n, r.envPoints, r.env.evals)
		}
	}
	if got := rows[2].pseudos; got != 40-len(slate) {
		t.Errorf("40 components with %d pseudo-components, want %d", got, 40-len(slate))
	}
	var out bytes.Buffer
	writeTable(&out, cfg, rows)
	lines := strings.Split(out.String(), "\n")
	tableRows := 0
	for _, l := range lines {
		if strings.HasPrefix(l, "| ") && !strings.HasPrefix(l, "| n ") {
			tableRows++
		}
	}
	if tableRows != 3 || !strings.Contains(out.String(), "|---:|") {
		t.Errorf("table:\n%s", out.String())
	}
	t.Logf("\n%s", out.String())
}

// TestScaleFluid checks the fluids: the asked size, distinct components,
// a normalised feed that is 75 % methane, and the same feed for the same
// seed.
func TestScaleFluid(t *testing.T) {
	for _, n := range []int{1, 2, 16, 31, 32, 50, 100} {
		comps, z, err := scaleFluid(n, 1)
		if err != nil {
			t.Fatalf("n = %d: %v", n, err)
		}
		if len(comps) != n || len(z) != n {
			t.Fatalf("n = %d: %d components, %d fractions", n, len(comps), len(z))
		}
		seen := map[string]bool{}
		sum := 0.0
		for i, c := range comps {
			if seen[c.ID] {
				t.Errorf("n = %d: %s twice", n, c.ID)
			}
			seen[c.ID] = true
			if !(z[i] > 0) {
				t.Errorf("n = %d: z[%d] = %g", n, i, z[i])
			}
			sum += z[i]
		}
		if math.Abs(sum-1) > 1e-12 || (n > 1 && math.Abs(z[0]-0.75) > 1e-12) {
			t.Errorf("n = %d: Σz = %g, z[methane] = %g", n, sum, z[0])
		}
		_, z2, _ := scaleFluid(n, 1)
		for i := range z {
			if z[i] != z2[i] {
				t.Fatalf("n = %d: feed differs between calls with one seed", n)
			}
		}
	}
	if _, _, err := scaleFluid(0, 1); err == nil {
		t.Error("0 components accepted")
	}
}

func TestBadFlags(t *testing.T) {
	for _, args := range [][]string{{"--sizes", "0"}, {"--sizes", "2,x"}, {"--model", "vdw"}, {"--min-time", "0"}, {"--pressure", "-1"}, {"x"}} {
		var stderr bytes.Buffer
		if _, err := parseConfig(args, &stderr); err == nil || stderr.Len() == 0 {
			t.Errorf("%q accepted (%q)", args, stderr.String())
		}
	}
}
