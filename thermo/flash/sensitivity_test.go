package flash

import (
	"context"
	"errors"
	"math"
	"testing"
)

// TestSensitivitiesMatchDifferences checks the K-value sensitivities and
// the state derivatives of a converged two-phase result against central
// differences of cold flashes (the definition of a derivative), on the
// 10-component gas of the benchmarks at 250 K, 5 MPa.
func TestSensitivitiesMatchDifferences(t *testing.T) {
	mx, z := benchGas(t)
	ws := NewWorkspace(mx)
	ctx := context.Background()
	T, P := 250.0, 5e6
	res, lo, hi := NewResult(mx), NewResult(mx), NewResult(mx)
	if err := ws.PT(ctx, T, P, z, Options{}, nil, res); err != nil {
		t.Fatal(err)
	}
	e := res.Estimate()
	if e.Phases != 2 || e.DLnKDT == nil || e.DLnKDP == nil || e.T != T || e.P != P {
		t.Fatalf("estimate %d phases at %g K, %g Pa, sensitivities %v", e.Phases, e.T, e.P, e.DLnKDT != nil)
	}
	d, ok := res.Derivatives()
	if !ok {
		t.Fatal("no state derivatives for a converged two-phase result")
	}
	for _, c := range []struct {
		name   string
		dT, dP float64
		dLnK   []float64
		dH, dV float64
	}{
		{"T", 1e-3, 0, e.DLnKDT, d.HT, d.VT},
		{"P", 0, 50, e.DLnKDP, d.HP, d.VP},
	} {
		if err := ws.PT(ctx, T-c.dT, P-c.dP, z, Options{}, nil, lo); err != nil {
			t.Fatal(err)
		}
		if err := ws.PT(ctx, T+c.dT, P+c.dP, z, Options{}, nil, hi); err != nil {
			t.Fatal(err)
		}
		h := 2 * (c.dT + c.dP)
		for i := range z {
			fd := (hi.LnK[i] - lo.LnK[i]) / h
			// The sensitivities come from the Hessian of the last Newton
			// step, a point within about 1e-3 of the solution in ln K:
			// agreement to 1e-3 is what that allows.
			if math.Abs(c.dLnK[i]-fd) > 1e-3*math.Abs(fd)+1e-9*math.Abs(res.LnK[i])/h {
				t.Errorf("d ln K_%d/d%s = %.8g, central difference %.8g", i, c.name, c.dLnK[i], fd)
			}
		}
		fdH := (hi.Overall.H - lo.Overall.H) / h
		fdV := (hi.Overall.MolarVolume - lo.Overall.MolarVolume) / h
		if math.Abs(c.dH-fdH) > 1e-4*math.Abs(fdH) {
			t.Errorf("dH/d%s = %.8g, central difference %.8g", c.name, c.dH, fdH)
		}
		if math.Abs(c.dV-fdV) > 1e-4*math.Abs(fdV) {
			t.Errorf("dV/d%s = %.8g, central difference %.8g", c.name, c.dV, fdV)
		}
	}
	// The total heat capacity includes the heat of partial vaporisation,
	// so it exceeds the mole-averaged phase heat capacities.
	cp := 0.0
	for _, p := range res.Phases {
		cp += p.Beta * p.Props.Cp
	}
	if !(d.HT > cp) {
		t.Errorf("total Cp %g not above the phase average %g", d.HT, cp)
	}
}

// TestShiftedWarmStart checks that the first-order shift of a warm start
// saves work and never changes the answer: from a state 0.5 K and 0.5 %
// away the shifted start takes fewer Newton iterations than the same
// estimate without its sensitivities, both agree with the cold flash, and
// a deliberately wrong sensitivity still gives the cold answer.
func TestShiftedWarmStart(t *testing.T) {
	mx, z := benchGas(t)
	ws := NewWorkspace(mx)
	ctx := context.Background()
	T, P := 250.0, 5e6
	prev, cold, warm := NewResult(mx), NewResult(mx), NewResult(mx)
	if err := ws.PT(ctx, T-0.5, P*0.995, z, Options{}, nil, prev); err != nil {
		t.Fatal(err)
	}
	if err := ws.PT(ctx, T, P, z, Options{}, nil, cold); err != nil {
		t.Fatal(err)
	}
	full := prev.Estimate()
	plain := full
	plain.DLnKDT, plain.DLnKDP = nil, nil
	bad := full
	bad.DLnKDT = make([]float64, len(z))
	for i := range bad.DLnKDT {
		bad.DLnKDT[i] = 0.5 * float64(i%3-1) // shifts ln K by ±0.25
	}
	var newton [3]int
	for k, e := range []*Estimate{&full, &plain, &bad} {
		if err := ws.PT(ctx, T, P, z, Options{}, e, warm); err != nil {
			t.Fatal(err)
		}
		newton[k] = warm.Report.NewtonIterations
		checkResult(t, ws, warm, z)
		if len(warm.Phases) != len(cold.Phases) {
			t.Fatalf("estimate %d: %d phases, cold %d", k, len(warm.Phases), len(cold.Phases))
		}
		for j := range cold.Phases {
			if d := math.Abs(warm.Phases[j].Beta - cold.Phases[j].Beta); d > 1e-9 {
				t.Errorf("estimate %d: phase %d amount differs from cold by %g", k, j, d)
			}
		}
	}
	if !(newton[0] < newton[1]) {
		t.Errorf("Newton iterations with sensitivities %d, without %d", newton[0], newton[1])
	}
}

// TestEstimateInputErrors checks that bad state or sensitivity fields of
// an estimate are rejected with the field named.
func TestEstimateInputErrors(t *testing.T) {
	mx, z := benchGas(t)
	ws, res := NewWorkspace(mx), NewResult(mx)
	ctx := context.Background()
	if err := ws.PT(ctx, 250, 5e6, z, Options{}, nil, res); err != nil {
		t.Fatal(err)
	}
	good := res.Estimate()
	copyOf := func() Estimate {
		e := good
		e.X = [][]float64{append([]float64(nil), good.X[0]...), append([]float64(nil), good.X[1]...)}
		e.DLnKDT = append([]float64(nil), good.DLnKDT...)
		e.DLnKDP = append([]float64(nil), good.DLnKDP...)
		return e
	}
	for _, c := range []struct {
		field string
		edit  func(e *Estimate)
	}{
		{"warm.T", func(e *Estimate) { e.T = math.NaN() }},
		{"warm.P", func(e *Estimate) { e.P = -1 }},
		{"warm.DLnKDT", func(e *Estimate) { e.DLnKDT = e.DLnKDT[:3] }},
		{"warm.DLnKDP[2]", func(e *Estimate) { e.DLnKDP[2] = math.Inf(1) }},
	} {
		e := copyOf()
		c.edit(&e)
		err := ws.PT(ctx, 251, 5e6, z, Options{}, &e, NewResult(mx))
		var ie *InputError
		if !errors.As(err, &ie) || ie.Field != c.field {
			t.Errorf("%s: got %v", c.field, err)
		}
	}
}

// TestRachfordRiceFromRoot checks that Rachford–Rice started at its own
// root stops at once instead of bisecting toward a bracket end that
// rounding puts on the root.
func TestRachfordRiceFromRoot(t *testing.T) {
	z := []float64{0.01, 0.02, 0.80, 0.07, 0.04, 0.015, 0.015, 0.01, 0.01, 0.01}
	K := []float64{9.1, 2.3, 3.4, 0.71, 0.22, 0.091, 0.071, 0.024, 0.0082, 0.0027}
	act := []int{0, 1, 2, 3, 4, 5, 6, 7, 8, 9}
	b, it, st := rachfordRice(z, K, act, 0.5)
	if st != rrRoot {
		t.Fatalf("status %v", st)
	}
	for _, start := range []float64{b, math.Nextafter(b, 0), math.Nextafter(b, 1)} {
		b2, it2, _ := rachfordRice(z, K, act, start)
		if it2 > 3 || math.Abs(b2-b) > 1e-14 {
			t.Errorf("from %v: β %v after %d iterations (first solve %v in %d)", start, b2, it2, b, it)
		}
	}
}
