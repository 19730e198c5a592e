package main

import (
	"context"
	"math"
	"strings"
	"testing"
	"time"

	"google.golang.org/protobuf/encoding/protojson"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

func testCtx(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	t.Cleanup(cancel)
	return ctx
}

// TestModelsAgainstServer runs "fugactl models" against the real server
// and checks the table and the --json output. The universal critical
// compressibilities are exact facts of the cubics: Zc = 0.307401 for
// Peng–Robinson (Peng & Robinson 1976) and 1/3 for SRK (Soave 1972).
func TestModelsAgainstServer(t *testing.T) {
	dial := realServer(t)
	r := runCLI(t, dial, "", "models")
	if r.code != exitOK {
		t.Fatalf("exit %d, stderr %s", r.code, r.stderr)
	}
	for _, want := range []string{"PR76", "PR78", "SRK", "0.307401", "0.333333", "References:", "Peng", "Soave"} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("table lacks %q:\n%s", want, r.stdout)
		}
	}
	if n := strings.Count(r.stdout, cautionShort); n != 1 {
		t.Errorf("caution printed %d times, want once", n)
	}

	j := runCLI(t, dial, "", "--json", "models")
	if j.code != exitOK {
		t.Fatalf("--json: exit %d, stderr %s", j.code, j.stderr)
	}
	var resp fugadv1.ListModelsResponse
	if err := protojson.Unmarshal([]byte(j.stdout), &resp); err != nil {
		t.Fatalf("--json output does not decode: %v\n%s", err, j.stdout)
	}
	if strings.Contains(j.stdout, "Caution") {
		t.Error("--json output carries the caution")
	}
	direct, err := directClient(t, dial).ListModels(testCtx(t), &fugadv1.ListModelsRequest{})
	if err != nil {
		t.Fatal(err)
	}
	if len(resp.GetModels()) != len(direct.GetModels()) || resp.GetModelVersion() != direct.GetModelVersion() {
		t.Fatalf("--json %v, server %v", &resp, direct)
	}
	for i, m := range resp.GetModels() {
		if m.GetName() != direct.GetModels()[i].GetName() || m.GetCriticalCompressibility() != direct.GetModels()[i].GetCriticalCompressibility() {
			t.Errorf("model %d: %v, server %v", i, m, direct.GetModels()[i])
		}
	}
	// Proto field names and field-number order: model_version (2) after
	// models (1).
	if !strings.Contains(j.stdout, `"critical_compressibility"`) || strings.Index(j.stdout, `"models"`) > strings.Index(j.stdout, `"model_version"`) {
		t.Errorf("unexpected JSON layout:\n%s", j.stdout)
	}
}

// TestComponentsAgainstServer lists and searches the data bank.
func TestComponentsAgainstServer(t *testing.T) {
	dial := realServer(t)
	r := runCLI(t, dial, "", "components", "butane")
	if r.code != exitOK {
		t.Fatalf("exit %d, stderr %s", r.code, r.stderr)
	}
	// n-Butane: C4H10, CAS 106-97-8 (CAS registry).
	for _, want := range []string{"n-butane", "isobutane", "C4H10", "106-97-8", "paraffin", "Tc K", "Pc bar"} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("table lacks %q:\n%s", want, r.stdout)
		}
	}
	if strings.Contains(r.stdout, "\nmethane ") {
		t.Errorf("search for butane lists methane:\n%s", r.stdout)
	}
	// A search with one match prints the details with the source.
	one := runCLI(t, dial, "", "components", "--search", "106-97-8")
	if one.code != exitOK || !strings.Contains(one.stdout, "source") || !strings.Contains(one.stdout, "critical temperature") {
		t.Errorf("single match: exit %d\n%s%s", one.code, one.stdout, one.stderr)
	}
	j := runCLI(t, dial, "", "components", "--json", "--search=methane")
	var resp fugadv1.ListComponentsResponse
	if err := protojson.Unmarshal([]byte(j.stdout), &resp); err != nil || j.code != exitOK {
		t.Fatalf("--json: exit %d, %v\n%s", j.code, err, j.stdout)
	}
	found := false
	for _, c := range resp.GetComponents() {
		if c.GetId() == "methane" {
			found = true
			// Methane Tc = 190.56 K (Poling, Prausnitz & O'Connell 2001,
			// App. A; from memory), to 0.5 K.
			if math.Abs(c.GetCriticalTemperatureK()-190.56) > 0.5 {
				t.Errorf("methane Tc %g K", c.GetCriticalTemperatureK())
			}
		}
	}
	if !found {
		t.Errorf("methane not in %v", &resp)
	}
}

// TestFugacityAgainstServer checks that fugactl sends the SI values of its
// engineering inputs and prints the server's numbers: the --json output
// must equal a direct call with T = 313.15 K, P = 7e6 Pa and the
// normalised composition, and the table must show them.
func TestFugacityAgainstServer(t *testing.T) {
	dial := realServer(t)
	args := []string{"fugacity", "--model", "PR78", "--fluid", kestrelFeed, "-T", "40C", "-P", "70bar", "--root", "vapour", "--derivatives", "all", "--no-cache"}
	j := runCLI(t, dial, "", append([]string{"--json"}, args...)...)
	if j.code != exitOK {
		t.Fatalf("exit %d, stderr %s", j.code, j.stderr)
	}
	var got fugadv1.FugacityCoefficientsResponse
	if err := protojson.Unmarshal([]byte(j.stdout), &got); err != nil {
		t.Fatalf("--json does not decode: %v\n%s", err, j.stdout)
	}
	fl := &fugadv1.Fluid{Model: fugadv1.Model_MODEL_PR78}
	for _, id := range kestrelIDs {
		fl.Components = append(fl.Components, &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: id}})
	}
	want, err := directClient(t, dial).FugacityCoefficients(testCtx(t), &fugadv1.FugacityCoefficientsRequest{
		Fluid: fl, TemperatureK: 313.15, PressurePa: 7e6, MoleFractions: kestrelX, Root: fugadv1.RootChoice_ROOT_CHOICE_VAPOUR,
		TemperatureDerivatives: true, PressureDerivatives: true, CompositionDerivatives: true, BypassCache: true,
	})
	if err != nil {
		t.Fatal(err)
	}
	n := len(kestrelIDs)
	if len(got.GetLnFugacityCoefficients()) != n || len(got.GetDLnPhiDMolesPerMol()) != n*n || len(got.GetDLnPhiDTemperaturePerK()) != n {
		t.Fatalf("sizes: %v", &got)
	}
	for i := range n {
		if !closeTo(got.GetLnFugacityCoefficients()[i], want.GetLnFugacityCoefficients()[i], 1e-12) {
			t.Errorf("ln φ[%d] = %.15g, direct call %.15g", i, got.GetLnFugacityCoefficients()[i], want.GetLnFugacityCoefficients()[i])
		}
	}
	if !closeTo(got.GetCompressibilityFactor(), want.GetCompressibilityFactor(), 1e-12) {
		t.Errorf("Z = %.15g, direct call %.15g", got.GetCompressibilityFactor(), want.GetCompressibilityFactor())
	}
	// Deterministic output: the same call gives the same bytes.
	if again := runCLI(t, dial, "", append([]string{"--json"}, args...)...); again.stdout != j.stdout {
		t.Errorf("two identical calls printed different JSON:\n%s\n%s", j.stdout, again.stdout)
	}

	tab := runCLI(t, dial, "", args...)
	if tab.code != exitOK {
		t.Fatalf("table: exit %d, %s", tab.code, tab.stderr)
	}
	for _, s := range []string{
		"313.15 K (40.00 °C)", "7.00000 MPa (70.0000 bar)", "amounts read as mol %",
		fixed(want.GetCompressibilityFactor(), 6), fixed(want.GetLnFugacityCoefficients()[2], 6),
		"∂lnφ/∂T 1/K", "∂ln φ_i/∂n_j", "solver: ", "n-hexane",
	} {
		if !strings.Contains(tab.stdout, s) {
			t.Errorf("table lacks %q:\n%s", s, tab.stdout)
		}
	}
	if strings.Count(tab.stdout, cautionShort) != 1 {
		t.Errorf("caution not printed exactly once:\n%s", tab.stdout)
	}
}

// TestServerValidationErrorPrinted sends an unknown component to the real
// server: the INVALID_ARGUMENT status with its reason and field violation
// must be printed, and the exit status is 1.
func TestServerValidationErrorPrinted(t *testing.T) {
	dial := realServer(t)
	r := runCLI(t, dial, "", "fugacity", "--model", "SRK", "--fluid", "methane=90, ethan=10", "-T", "300K", "-P", "1bar")
	if r.code != exitFailed {
		t.Fatalf("exit %d, want %d; stderr %s", r.code, exitFailed, r.stderr)
	}
	for _, s := range []string{"INVALID_ARGUMENT", "reason UNKNOWN_COMPONENT", "field violations:", "fluid.components[1].id: ", `"ethan"`} {
		if !strings.Contains(r.stderr, s) {
			t.Errorf("stderr lacks %q:\n%s", s, r.stderr)
		}
	}
	if r.stdout != "" {
		t.Errorf("stdout not empty on error: %q", r.stdout)
	}
}

// TestFlashAgainstServer runs a T–P flash of the Kestrel feed at −20 °C and
// 40 bar against the real server, whose T–P flash is wired: the --json
// output must equal a direct call with the SI inputs, and the table must
// show one row per phase of that answer. (Specifications the server cannot
// solve yet are covered against the recording fake.)
func TestFlashAgainstServer(t *testing.T) {
	dial := realServer(t)
	args := []string{"flash", "--model", "PR78", "--fluid", kestrelFeed, "-T", "-20C", "-P", "40bar", "--no-cache"}
	j := runCLI(t, dial, "", append([]string{"--json"}, args...)...)
	if j.code != exitOK {
		t.Fatalf("exit %d: %s", j.code, j.stderr)
	}
	var got fugadv1.FlashResponse
	if err := protojson.Unmarshal([]byte(j.stdout), &got); err != nil {
		t.Fatalf("--json does not decode: %v", err)
	}
	fl := &fugadv1.Fluid{Model: fugadv1.Model_MODEL_PR78}
	for _, id := range kestrelIDs {
		fl.Components = append(fl.Components, &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: id}})
	}
	want, err := directClient(t, dial).Flash(testCtx(t), &fugadv1.FlashRequest{Fluid: fl, BypassCache: true, State: &fugadv1.FlashState{
		MoleFractions: kestrelX, Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: 253.15, PressurePa: 40e5}}}})
	if err != nil {
		t.Fatal(err)
	}
	if len(got.GetResult().GetPhases()) != len(want.GetResult().GetPhases()) || !closeTo(got.GetResult().GetVapourFraction(), want.GetResult().GetVapourFraction(), 1e-12) {
		t.Errorf("fugactl result %v\ndirect %v", got.GetResult(), want.GetResult())
	}
	tab := runCLI(t, dial, "", args...)
	if tab.code != exitOK {
		t.Fatalf("table: exit %d: %s", tab.code, tab.stderr)
	}
	for _, p := range phaseLabels(want.GetResult().GetPhases()) {
		if !strings.Contains(tab.stdout, "\n"+p+" ") || !strings.Contains(tab.stdout, p+" mol %") {
			t.Errorf("table lacks phase %q:\n%s", p, tab.stdout)
		}
	}
	if !strings.Contains(tab.stdout, fixed(want.GetResult().GetVapourFraction(), 5)) || !strings.Contains(tab.stdout, "solver: ") {
		t.Errorf("table:\n%s", tab.stdout)
	}
}
