package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	spb "google.golang.org/genproto/googleapis/rpc/status"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// threeFeed is a fictional three-component feed for the fake-server tests.
const threeFeed = "methane=80, ethane=15, n-hexane=5"

var threeX = []float64{0.80, 0.15, 0.05}

// fixtureFlash is a TEST FIXTURE, not a computed result: numbers shaped
// like a two-phase answer, used only to check how fugactl prints one.
func fixtureFlash() *fugadv1.FlashResult {
	p := func(z, rho float64) *fugadv1.Properties {
		cp := 45.5
		return &fugadv1.Properties{CompressibilityFactor: z, MassDensityKgPerM3: rho, MolarDensityMolPerM3: rho / 0.02,
			MolarMassKgPerMol: 0.02, MolarEnthalpyJPerMol: -80000, MolarEntropyJPerMolK: -30, MolarIsobaricHeatCapacityJPerMolK: &cp}
	}
	tpd := -0.0123
	return &fugadv1.FlashResult{
		TemperatureK: 313.15, PressurePa: 7e6, VapourFraction: 0.9,
		Phases: []*fugadv1.Phase{
			{Label: fugadv1.PhaseLabel_PHASE_LABEL_VAPOUR, Amount: 0.9, MoleFractions: []float64{0.85, 0.14, 0.01}, Properties: p(0.85, 61.2)},
			{Label: fugadv1.PhaseLabel_PHASE_LABEL_LIQUID, Amount: 0.1, MoleFractions: []float64{0.35, 0.24, 0.41}, Properties: p(0.31, 488.5)},
		},
		Overall:   p(0.80, 70),
		KValues:   []float64{2.4286, 0.58333, 0.024390},
		WarmStart: &fugadv1.WarmStart{KValues: []float64{2.4286, 0.58333, 0.024390}},
		Report: &fugadv1.SolverReport{
			Stages: []*fugadv1.StageReport{
				{Stage: fugadv1.SolverStage_SOLVER_STAGE_STABILITY, Iterations: 7, Converged: true},
				{Stage: fugadv1.SolverStage_SOLVER_STAGE_SUCCESSIVE_SUBSTITUTION, Iterations: 12, Converged: true},
				{Stage: fugadv1.SolverStage_SOLVER_STAGE_NEWTON, Iterations: 3, Converged: true},
			},
			InitialEstimate: fugadv1.InitialEstimate_INITIAL_ESTIMATE_CORRELATION, LnPhiEvaluations: 57, FinalResidual: 3.1e-12,
			MinimumTangentPlaneDistance: &tpd, StabilityPhaseCount: 2, Converged: true, DataVersion: "components-test", ModelVersion: "models-test",
		},
	}
}

// TestFlashSpecificationsSent checks, for every specification kind, that
// fugactl sends the SI values of its engineering inputs (conversions by
// definition of the units, see TestParseQuantity), and prints the
// UNIMPLEMENTED answer readably with exit status 1.
func TestFlashSpecificationsSent(t *testing.T) {
	const psi = 6894.757293168361
	tests := []struct {
		args []string
		want *fugadv1.FlashState
	}{
		{[]string{"-T", "40C", "-P", "70bar"}, &fugadv1.FlashState{Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: 313.15, PressurePa: 7e6}}}},
		{[]string{"--pressure", "25barg", "--enthalpy", "-79.2kJ/mol"}, &fugadv1.FlashState{Specification: &fugadv1.FlashState_Ph{Ph: &fugadv1.PressureEnthalpy{PressurePa: 25e5 + 101325, MolarEnthalpyJPerMol: -79200}}}},
		{[]string{"-P", "1000psia", "-S", "-25J/(mol·K)"}, &fugadv1.FlashState{Specification: &fugadv1.FlashState_Ps{Ps: &fugadv1.PressureEntropy{PressurePa: 1000 * psi, MolarEntropyJPerMolK: -25}}}},
		{[]string{"-T", "104F", "-V", "0.3L/mol"}, &fugadv1.FlashState{Specification: &fugadv1.FlashState_Tv{Tv: &fugadv1.TemperatureVolume{TemperatureK: 313.15, MolarVolumeM3PerMol: 3e-4}}}},
		{[]string{"-U", "-81kJ/mol", "--volume", "290cm3/mol"}, &fugadv1.FlashState{Specification: &fugadv1.FlashState_Uv{Uv: &fugadv1.InternalEnergyVolume{MolarInternalEnergyJPerMol: -81000, MolarVolumeM3PerMol: 2.9e-4}}}},
		{[]string{"-P", "8bar", "--beta", "0"}, &fugadv1.FlashState{Specification: &fugadv1.FlashState_PVapourFraction{PVapourFraction: &fugadv1.PressureVapourFraction{PressurePa: 8e5, VapourFraction: 0}}}},
		{[]string{"-T", "25C", "--vapour-fraction", "50%"}, &fugadv1.FlashState{Specification: &fugadv1.FlashState_TVapourFraction{TVapourFraction: &fugadv1.TemperatureVapourFraction{TemperatureK: 298.15, VapourFraction: 0.5}}}},
	}
	for _, tc := range tests {
		rec := &recorder{err: unimplemented(t)}
		dial := serveRecorder(t, rec)
		args := append([]string{"flash", "--model", "SRK", "--fluid", threeFeed, "--tolerance", "1e-12", "--no-cache"}, tc.args...)
		r := runCLI(t, dial, "", args...)
		if r.code != exitFailed {
			t.Errorf("%v: exit %d, want %d; stderr %s", tc.args, r.code, exitFailed, r.stderr)
		}
		for _, s := range []string{"UNIMPLEMENTED", "reason NOT_IMPLEMENTED", "domain fugad", "no solver for it yet", "hint:"} {
			if !strings.Contains(r.stderr, s) {
				t.Errorf("%v: stderr lacks %q:\n%s", tc.args, s, r.stderr)
			}
		}
		if len(rec.flash) != 1 {
			t.Fatalf("%v: %d requests", tc.args, len(rec.flash))
		}
		req := rec.flash[0]
		tc.want.MoleFractions = threeX
		if !statesClose(req.GetState(), tc.want) {
			t.Errorf("%v: sent\n %v\nwant\n %v", tc.args, req.GetState(), tc.want)
		}
		if req.GetFluid().GetModel() != fugadv1.Model_MODEL_SRK || len(req.GetFluid().GetComponents()) != 3 ||
			req.GetFluid().GetComponents()[2].GetId() != "n-hexane" || !req.GetBypassCache() || req.GetOptions().GetTolerance() != 1e-12 {
			t.Errorf("%v: request %v", tc.args, req)
		}
	}
}

// statesClose compares two states field by field to rounding (inputs such
// as 40 °C are sums in floating point).
func statesClose(got, want *fugadv1.FlashState) bool {
	if !sameFractions(got.GetMoleFractions(), want.GetMoleFractions()) {
		return false
	}
	g, w := proto.Clone(got).(*fugadv1.FlashState), proto.Clone(want).(*fugadv1.FlashState)
	g.MoleFractions, w.MoleFractions = nil, nil
	gm, wm := g.ProtoReflect(), w.ProtoReflect()
	od := gm.Descriptor().Oneofs().ByName("specification")
	gf, wf := gm.WhichOneof(od), wm.WhichOneof(od)
	if gf == nil || wf == nil || gf.Number() != wf.Number() {
		return false
	}
	gs, ws := gm.Get(gf).Message(), wm.Get(wf).Message()
	fields := gs.Descriptor().Fields()
	for i := range fields.Len() {
		f := fields.Get(i)
		if !closeTo(gs.Get(f).Float(), ws.Get(f).Float(), 1e-13) {
			return false
		}
	}
	return true
}

// TestFlashUsageErrors checks that bad specifications never reach the
// server and exit with status 2 and a clear message.
func TestFlashUsageErrors(t *testing.T) {
	rec := &recorder{err: unimplemented(t)}
	dial := serveRecorder(t, rec)
	tests := []struct {
		args []string
		want string
	}{
		{[]string{"-T", "40C"}, "exactly two specification variables"},
		{[]string{"-T", "40C", "-P", "70bar", "-H", "1kJ/mol"}, "exactly two"},
		{[]string{"-T", "40C", "-H", "1kJ/mol"}, "H+T is not a specification"},
		{[]string{"-T", "40", "-P", "70bar"}, `temperature "40" has no unit`},
		{[]string{"-T", "40C", "-P", "70 bars"}, `unknown unit "bars"`},
		{[]string{"-T", "40C", "-P", "70bar", "--beta", "2"}, "exactly two"},
		{[]string{"-P", "70bar", "--beta", "2"}, "must lie within 0 and 1"},
		{[]string{"-T", "40C", "-P", "70bar", "extra"}, `unexpected argument "extra"`},
	}
	for _, tc := range tests {
		r := runCLI(t, dial, "", append([]string{"flash", "--model", "PR78", "--fluid", threeFeed}, tc.args...)...)
		if r.code != exitUsage || !strings.Contains(r.stderr, tc.want) {
			t.Errorf("%v: exit %d, stderr %q; want %d and %q", tc.args, r.code, r.stderr, exitUsage, tc.want)
		}
	}
	r := runCLI(t, dial, "", "flash", "--model", "PR78", "--fluid", "methane=80, ethane=1x", "-T", "40C", "-P", "1bar")
	if r.code != exitUsage || !strings.Contains(r.stderr, `"ethane=1x"`) {
		t.Errorf("bad fluid: exit %d, %q", r.code, r.stderr)
	}
	if len(rec.flash) != 0 {
		t.Errorf("%d requests reached the server", len(rec.flash))
	}
}

// TestFlashTableAndJSON checks the printed table of a (fixture) two-phase
// result, and that --json prints the response itself.
func TestFlashTableAndJSON(t *testing.T) {
	rec := &recorder{flashResult: fixtureFlash()}
	dial := serveRecorder(t, rec)
	args := []string{"flash", "--model", "PR78", "--fluid", "methane=80.1, ethane=15, n-hexane=5", "-T", "40C", "-P", "70bar"}
	r := runCLI(t, dial, "", args...)
	if r.code != exitOK {
		t.Fatalf("exit %d: %s", r.code, r.stderr)
	}
	for _, s := range []string{
		"T–P: T 313.15 K (40.00 °C), P 7.00000 MPa (70.0000 bar)",
		"2 phase(s), vapour fraction β 0.90000",
		"normalised", // the feed summed to 100.1 %
		"phase", "β", "ρ kg/m³", "Z", "H J/mol",
		"vapour   0.90000", "liquid   0.10000", "overall",
		"61.200", "488.50", "0.85000",
		"component", "feed mol %", "vapour mol %", "liquid mol %", "K",
		"n-hexane", "41.0000", "0.024390",
		"solver: stability 7 → substitution 12 → Newton 3 | ln φ evaluations 57 | residual 3.1e-12 (converged) | stability: 2 phase(s), min TPD -0.0123 | start: correlation | data components-test, models models-test",
	} {
		if !strings.Contains(r.stdout, s) {
			t.Errorf("table lacks %q:\n%s", s, r.stdout)
		}
	}
	if strings.Count(r.stdout, cautionShort) != 1 || !strings.HasSuffix(strings.TrimSpace(r.stdout), cautionShort) {
		t.Errorf("caution not printed once at the end:\n%s", r.stdout)
	}
	j := runCLI(t, dial, "", append([]string{"--json"}, args...)...)
	var got fugadv1.FlashResponse
	if err := protojson.Unmarshal([]byte(j.stdout), &got); err != nil || j.code != exitOK {
		t.Fatalf("--json: exit %d, %v:\n%s", j.code, err, j.stdout)
	}
	if !proto.Equal(got.GetResult(), fixtureFlash()) {
		t.Errorf("--json decodes to\n%v\nwant\n%v", &got, fixtureFlash())
	}
	// Zero scalars are printed, and unit-suffixed proto names are used.
	if !strings.Contains(j.stdout, `"temperature_k": 313.15`) || strings.Contains(j.stdout, "Caution") {
		t.Errorf("--json layout:\n%s", j.stdout)
	}
}

// TestErrorDetailsPrinted checks the readable form of an INVALID_ARGUMENT
// status with several field violations, of an ABORTED status with a
// not-converged estimate, and the --json form of an error.
func TestErrorDetailsPrinted(t *testing.T) {
	bad := statusWith(t, codes.InvalidArgument, "invalid request: state.tp.temperature_k: must be within [1, 10000] K (and 1 more field violations)", "INVALID_REQUEST",
		&errdetails.BadRequest{FieldViolations: []*errdetails.BadRequest_FieldViolation{
			{Field: "state.tp.temperature_k", Description: "must be within [1, 10000] K, got 20000"},
			{Field: "fluid.components[1].id", Description: `unknown component "ethan"`},
		}})
	rec := &recorder{err: bad}
	dial := serveRecorder(t, rec)
	r := runCLI(t, dial, "", "flash", "--model", "PR78", "--fluid", threeFeed, "-T", "20000K", "-P", "1bar")
	want := []string{
		"fugactl flash: INVALID_ARGUMENT (reason INVALID_REQUEST, domain fugad)",
		"metadata: endpoint=Flash",
		"field violations:",
		"    state.tp.temperature_k: must be within [1, 10000] K, got 20000 (-T)",
		`    fluid.components[1].id: unknown component "ethan" (--fluid / --fluid-file)`,
	}
	if r.code != exitFailed {
		t.Errorf("exit %d", r.code)
	}
	for _, s := range want {
		if !strings.Contains(r.stderr, s) {
			t.Errorf("stderr lacks %q:\n%s", s, r.stderr)
		}
	}
	// --json: the google.rpc.Status on stdout, with its details.
	j := runCLI(t, dial, "", "--json", "flash", "--model", "PR78", "--fluid", threeFeed, "-T", "20000K", "-P", "1bar")
	var st spb.Status
	if err := protojson.Unmarshal([]byte(j.stdout), &st); err != nil {
		t.Fatalf("--json error output does not decode as google.rpc.Status: %v\n%s", err, j.stdout)
	}
	if codes.Code(st.GetCode()) != codes.InvalidArgument || len(st.GetDetails()) != 2 || j.code != exitFailed {
		t.Errorf("--json status %v, exit %d", &st, j.code)
	}

	nc := statusWith(t, codes.Aborted, "flash did not converge after 200 iterations (residual 3.2e-06)", "NOT_CONVERGED",
		&fugadv1.NotConvergedDetail{Residual: 3.2e-6, Tolerance: 1e-10, BestEstimate: &fugadv1.NotConvergedDetail_Flash{Flash: fixtureFlash()}})
	rec2 := &recorder{err: nc}
	r = runCLI(t, serveRecorder(t, rec2), "", "flash", "--model", "PR78", "--fluid", threeFeed, "-T", "40C", "-P", "70bar")
	for _, s := range []string{"ABORTED (reason NOT_CONVERGED", "residual 3.2e-06 against tolerance 1e-10", "best estimate (not an answer): T 313.15 K", "hint: the solver did not converge"} {
		if !strings.Contains(r.stderr, s) {
			t.Errorf("stderr lacks %q:\n%s", s, r.stderr)
		}
	}
}

// TestBatchFromCSVAndJSON checks that the states of a CSV and of a JSON
// file are sent in SI with the default composition, and that a failed item
// is listed with its own error while the others print.
func TestBatchFromCSVAndJSON(t *testing.T) {
	failed := status.New(codes.InvalidArgument, "invalid request: states[1].ph.molar_enthalpy_j_per_mol: not finite")
	failed, _ = failed.WithDetails(&errdetails.ErrorInfo{Reason: "INVALID_REQUEST", Domain: "fugad"},
		&errdetails.BadRequest{FieldViolations: []*errdetails.BadRequest_FieldViolation{{Field: "states[1].ph.molar_enthalpy_j_per_mol", Description: "must be finite"}}})
	resp := &fugadv1.FlashBatchResponse{Items: []*fugadv1.FlashBatchItem{
		{Status: &spb.Status{}, Result: fixtureFlash()},
		{Status: failed.Proto()},
		{Status: &spb.Status{}, Result: fixtureFlash()},
	}}
	dir := t.TempDir()
	csvFile := filepath.Join(dir, "kr-separator.csv")
	// Fictional separator readings of the Kestrel Ridge plant.
	csv := "# Kestrel Ridge inlet separator, fictional readings\n" +
		"id,T [C],P [bar],H [kJ/mol],fluid\n" +
		"06:00,38.5,69.8,,\n" +
		"choke outlet,,25.0,-79.2,\n" +
		"07:00,41.2,70.3,,\"n-hexane=4, methane=81, ethane=15\"\n"
	if err := os.WriteFile(csvFile, []byte(csv), 0o644); err != nil {
		t.Fatal(err)
	}
	jsonFile := filepath.Join(dir, "kr-separator.json")
	js := `[{"id": "06:00", "T": "38.5C", "P": "69.8bar"},
	        {"id": "choke outlet", "pressure": "25bar", "enthalpy": "-79.2kJ/mol"},
	        {"id": "07:00", "T": "41.2 °C", "P": "70.3bara", "fluid": "n-hexane=4, methane=81, ethane=15"}]`
	if err := os.WriteFile(jsonFile, []byte(js), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, file := range []string{csvFile, jsonFile} {
		rec := &recorder{batchResp: resp}
		r := runCLI(t, serveRecorder(t, rec), "", "batch", "--model", "PR78", "--fluid", threeFeed, "--file", file)
		if r.code != exitFailed {
			t.Errorf("%s: exit %d, want %d (one item failed); stderr %s", file, r.code, exitFailed, r.stderr)
		}
		if len(rec.batch) != 1 {
			t.Fatalf("%s: %d requests", file, len(rec.batch))
		}
		req := rec.batch[0]
		want := []*fugadv1.FlashState{
			{Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: 311.65, PressurePa: 69.8e5}}},
			{Specification: &fugadv1.FlashState_Ph{Ph: &fugadv1.PressureEnthalpy{PressurePa: 25e5, MolarEnthalpyJPerMol: -79200}}},
			{MoleFractions: []float64{0.81, 0.15, 0.04}, Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: 314.35, PressurePa: 70.3e5}}},
		}
		if len(req.GetStates()) != 3 || !sameFractions(req.GetMoleFractions(), threeX) {
			t.Fatalf("%s: request %v", file, req)
		}
		for i, w := range want {
			if !statesClose(req.GetStates()[i], w) {
				t.Errorf("%s: state %d = %v, want %v", file, i, req.GetStates()[i], w)
			}
		}
		for _, s := range []string{"Batch of 3 states", "06:00", "choke outlet", "OK", "INVALID_ARGUMENT (see below)", "1 of 3 states failed:",
			"states[1].ph.molar_enthalpy_j_per_mol: must be finite", "vapour+liquid", cautionShort} {
			if !strings.Contains(r.stdout, s) {
				t.Errorf("%s: output lacks %q:\n%s", file, s, r.stdout)
			}
		}
	}
	// Bad files are usage errors naming the line.
	bad := filepath.Join(dir, "bad.csv")
	_ = os.WriteFile(bad, []byte("T [C],P [bar]\n40,70\n40C,70\n"), 0o644)
	r := runCLI(t, serveRecorder(t, &recorder{batchResp: resp}), "", "batch", "--model", "PR78", "--fluid", threeFeed, "--file", bad)
	if r.code != exitUsage || !strings.Contains(r.stderr, "line 3") || !strings.Contains(r.stderr, `"40C" must be a plain number`) {
		t.Errorf("bad csv: exit %d, %s", r.code, r.stderr)
	}
	_ = os.WriteFile(bad, []byte("T,Q\n40C,1\n"), 0o644)
	r = runCLI(t, serveRecorder(t, &recorder{batchResp: resp}), "", "batch", "--model", "PR78", "--fluid", threeFeed, "--file", bad)
	if r.code != exitUsage || !strings.Contains(r.stderr, `unknown column "Q"`) {
		t.Errorf("bad column: exit %d, %s", r.code, r.stderr)
	}
}

// TestStreamSession feeds lines to "fugactl stream" and checks what the
// session sends (fluid on the first message only, SI states, sequence =
// line number, warm starts carried) and that answers print as rows.
func TestStreamSession(t *testing.T) {
	answer := func(req *fugadv1.FlashStreamRequest) *fugadv1.FlashStreamResponse {
		tp := req.GetState().GetTp()
		if tp == nil {
			st := status.New(codes.Unimplemented, "FlashStream: no solver for this specification yet")
			st, _ = st.WithDetails(&errdetails.ErrorInfo{Reason: "NOT_IMPLEMENTED", Domain: "fugad"})
			return &fugadv1.FlashStreamResponse{Sequence: req.GetSequence(), Status: st.Proto()}
		}
		res := fixtureFlash()
		res.TemperatureK, res.PressurePa = tp.GetTemperatureK(), tp.GetPressurePa()
		// A warm start that identifies the answer, to check it is carried.
		res.WarmStart = &fugadv1.WarmStart{KValues: []float64{float64(req.GetSequence()), 1, 0.1}}
		return &fugadv1.FlashStreamResponse{Sequence: req.GetSequence(), Status: &spb.Status{}, Result: res}
	}
	input := "# fictional Kestrel Ridge readings\nT=40C P=70bar\n\nT=41C,P=70.5bar\nT=oops P=1bar\nP=25barg H=-79.2kJ/mol\n"
	for _, warm := range []bool{false, true} {
		rec := &recorder{streamAnswer: answer}
		args := []string{"stream", "--model", "PR78", "--fluid", threeFeed}
		if warm {
			args = append(args, "--warm-start")
		}
		r := runCLI(t, serveRecorder(t, rec), input, args...)
		if r.code != exitFailed {
			t.Errorf("warm %v: exit %d, want 1 (a line was skipped and a state failed)", warm, r.code)
		}
		if !strings.Contains(r.stderr, "line 5 skipped") || !strings.Contains(r.stderr, `"oops"`) {
			t.Errorf("warm %v: stderr %q", warm, r.stderr)
		}
		if len(rec.stream) != 3 {
			t.Fatalf("warm %v: %d messages, want 3", warm, len(rec.stream))
		}
		seqs := []uint64{2, 4, 6}
		for i, m := range rec.stream {
			if m.GetSequence() != seqs[i] {
				t.Errorf("message %d sequence %d, want %d", i, m.GetSequence(), seqs[i])
			}
			if (m.GetFluid() != nil) != (i == 0) || (len(m.GetMoleFractions()) > 0) != (i == 0) || m.GetNoImplicitWarmStart() {
				t.Errorf("message %d: fluid/default composition on the wrong message: %v", i, m)
			}
		}
		if !sameFractions(rec.stream[0].GetMoleFractions(), threeX) || rec.stream[0].GetFluid().GetModel() != fugadv1.Model_MODEL_PR78 {
			t.Errorf("first message %v", rec.stream[0])
		}
		if !statesClose(rec.stream[1].GetState(), &fugadv1.FlashState{Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: 314.15, PressurePa: 70.5e5}}}) {
			t.Errorf("second state %v", rec.stream[1].GetState())
		}
		ws := rec.stream[1].GetState().GetWarmStart()
		if warm && (ws == nil || ws.GetKValues()[0] != 2) {
			t.Errorf("warm start of the answer to line 2 not carried: %v", ws)
		}
		if !warm && ws != nil {
			t.Errorf("warm start sent without --warm-start: %v", ws)
		}
		for _, s := range []string{"line", "specification", "T 40.00°C P 70.000 bar", "T 41.00°C P 70.500 bar", "P 26.013 bar H -79200.0 J/mol", "vapour+liquid", "UNIMPLEMENTED", "reason NOT_IMPLEMENTED", "3 state(s) sent, 1 line(s) skipped", cautionShort} {
			if !strings.Contains(r.stdout, s) {
				t.Errorf("warm %v: output lacks %q:\n%s", warm, s, r.stdout)
			}
		}
	}
	// --json prints one decodable FlashStreamResponse per line; --cold asks
	// for no implicit warm start on every message.
	rec := &recorder{streamAnswer: answer}
	r := runCLI(t, serveRecorder(t, rec), "40C 70bar\n45C 71bar\n", "--json", "stream", "--model", "PR78", "--fluid", threeFeed, "--columns", "T,P", "--cold")
	for i, m := range rec.stream {
		if !m.GetNoImplicitWarmStart() {
			t.Errorf("--cold: message %d asks for the implicit warm start", i)
		}
	}
	lines := strings.Split(strings.TrimSpace(r.stdout), "\n")
	if r.code != exitOK || len(lines) != 2 {
		t.Fatalf("--json stream: exit %d, %d lines:\n%s%s", r.code, len(lines), r.stdout, r.stderr)
	}
	for i, l := range lines {
		var m fugadv1.FlashStreamResponse
		if err := protojson.Unmarshal([]byte(l), &m); err != nil || m.GetSequence() != uint64(i+1) {
			t.Errorf("line %d: %v %v", i, err, &m)
		}
	}
}

// TestSaturationSent checks the request of a dew point at a pressure and a
// bubble point at a temperature, and the printed answer.
func TestSaturationSent(t *testing.T) {
	rec := &recorder{err: unimplemented(t)}
	dial := serveRecorder(t, rec)
	r := runCLI(t, dial, "", "saturation", "dew", "--model", "PR78", "--fluid", threeFeed, "-P", "55bar")
	if r.code != exitFailed || !strings.Contains(r.stderr, "UNIMPLEMENTED") {
		t.Errorf("exit %d, %s", r.code, r.stderr)
	}
	r = runCLI(t, dial, "", "saturation", "--type", "bubble", "--model", "PR78", "--fluid", threeFeed, "-T", "35C")
	if r.code != exitFailed {
		t.Errorf("exit %d, %s", r.code, r.stderr)
	}
	r = runCLI(t, dial, "", "saturation", "dew", "--branch", "upper", "--model", "PR78", "--fluid", threeFeed, "-T", "35C")
	if r.code != exitFailed {
		t.Errorf("exit %d, %s", r.code, r.stderr)
	}
	if len(rec.saturation) != 3 {
		t.Fatalf("%d requests", len(rec.saturation))
	}
	d, b := rec.saturation[0], rec.saturation[1]
	if d.GetBranch() != fugadv1.SaturationBranch_SATURATION_BRANCH_UNSPECIFIED || rec.saturation[2].GetBranch() != fugadv1.SaturationBranch_SATURATION_BRANCH_UPPER {
		t.Errorf("branches %v, %v: want unspecified, then upper", d.GetBranch(), rec.saturation[2].GetBranch())
	}
	if d.GetType() != fugadv1.SaturationType_SATURATION_TYPE_DEW || d.GetPressurePa() != 55e5 || !sameFractions(d.GetMoleFractions(), threeX) {
		t.Errorf("dew request %v", d)
	}
	if b.GetType() != fugadv1.SaturationType_SATURATION_TYPE_BUBBLE || !closeTo(b.GetTemperatureK(), 308.15, 1e-13) {
		t.Errorf("bubble request %v", b)
	}
	for _, args := range [][]string{
		{"saturation", "--model", "PR78", "--fluid", threeFeed, "-P", "55bar"},
		{"saturation", "dew", "--model", "PR78", "--fluid", threeFeed, "-P", "55bar", "-T", "3C"},
		{"saturation", "boil", "--model", "PR78", "--fluid", threeFeed, "-P", "55bar"},
		{"saturation", "dew", "--branch", "middle", "--model", "PR78", "--fluid", threeFeed, "-P", "55bar"},
	} {
		if r := runCLI(t, dial, "", args...); r.code != exitUsage {
			t.Errorf("%v: exit %d, %s", args, r.code, r.stderr)
		}
	}
	// A (fixture) answer prints as a table.
	fix := &recorder{saturationRsp: &fugadv1.SaturationPointResponse{TemperatureK: 268.15, PressurePa: 55e5, IncipientPhase: fugadv1.PhaseLabel_PHASE_LABEL_LIQUID,
		IncipientMoleFractions: []float64{0.3, 0.2, 0.5}, KValues: []float64{2.6667, 0.75, 0.1}, Report: &fugadv1.SolverReport{Converged: true}}}
	r = runCLI(t, serveRecorder(t, fix), "", "saturation", "dew", "--model", "PR78", "--fluid", threeFeed, "-P", "55bar")
	for _, s := range []string{"Dew point at P 5.50000 MPa (55.0000 bar):  T 268.15 K (-5.00 °C)", "incipient liquid mol %", "50.0000", cautionShort} {
		if !strings.Contains(r.stdout, s) {
			t.Errorf("output lacks %q:\n%s", s, r.stdout)
		}
	}
}
