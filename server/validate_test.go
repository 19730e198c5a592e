package server

import (
	"context"
	"math"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

func fugacityReq() *fugadv1.FugacityCoefficientsRequest {
	return &fugadv1.FugacityCoefficientsRequest{
		Fluid: gasFluid(), TemperatureK: 250, PressurePa: 5e6,
		MoleFractions: gasX, Root: fugadv1.RootChoice_ROOT_CHOICE_MINIMUM_GIBBS,
	}
}

func tpState(t, p float64) *fugadv1.FlashState {
	return &fugadv1.FlashState{
		MoleFractions: gasX,
		Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: t, PressurePa: p}},
	}
}

func flashReq() *fugadv1.FlashRequest {
	return &fugadv1.FlashRequest{Fluid: gasFluid(), State: tpState(220, 4e6)}
}

func batchReq() *fugadv1.FlashBatchRequest {
	return &fugadv1.FlashBatchRequest{Fluid: gasFluid(), MoleFractions: gasX,
		States: []*fugadv1.FlashState{tpState(220, 4e6), tpState(230, 4e6)}}
}

func satReq() *fugadv1.SaturationPointRequest {
	return &fugadv1.SaturationPointRequest{Fluid: gasFluid(), MoleFractions: gasX,
		Type: fugadv1.SaturationType_SATURATION_TYPE_DEW, Specified: &fugadv1.SaturationPointRequest_PressurePa{PressurePa: 3e6}}
}

func envReq() *fugadv1.PhaseEnvelopeRequest {
	return &fugadv1.PhaseEnvelopeRequest{Fluid: gasFluid(), MoleFractions: gasX}
}

func userComp(id string, tc, pc, w, mw float64) *fugadv1.ComponentSpec {
	return &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_User{User: &fugadv1.UserComponent{
		Id: id, CriticalTemperatureK: tc, CriticalPressurePa: pc, AcentricFactor: w, MolarMassKgPerMol: mw,
		IdealGasHeatCapacity: &fugadv1.IdealGasHeatCapacity{Coefficients: []float64{4}, MinimumTemperatureK: 200, MaximumTemperatureK: 1000},
	}}}
}

// TestBadRequests sends malformed requests to every endpoint over a real
// connection and checks the code and that a field violation names the
// offending field.
func TestBadRequests(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxComponents: 5, MaxBatchStates: 3, MaxEnvelopePoints: 50}}})
	c := e.client
	fug := func(mut func(r *fugadv1.FugacityCoefficientsRequest)) func(ctx context.Context) error {
		return func(ctx context.Context) error {
			r := fugacityReq()
			mut(r)
			_, err := c.FugacityCoefficients(ctx, r)
			return err
		}
	}
	flash := func(mut func(r *fugadv1.FlashRequest)) func(ctx context.Context) error {
		return func(ctx context.Context) error {
			r := flashReq()
			mut(r)
			_, err := c.Flash(ctx, r)
			return err
		}
	}
	batch := func(mut func(r *fugadv1.FlashBatchRequest)) func(ctx context.Context) error {
		return func(ctx context.Context) error {
			r := batchReq()
			mut(r)
			_, err := c.FlashBatch(ctx, r)
			return err
		}
	}
	sat := func(mut func(r *fugadv1.SaturationPointRequest)) func(ctx context.Context) error {
		return func(ctx context.Context) error {
			r := satReq()
			mut(r)
			_, err := c.SaturationPoint(ctx, r)
			return err
		}
	}
	env := func(mut func(r *fugadv1.PhaseEnvelopeRequest)) func(ctx context.Context) error {
		return func(ctx context.Context) error {
			r := envReq()
			mut(r)
			_, err := c.PhaseEnvelope(ctx, r)
			return err
		}
	}
	inv := codes.InvalidArgument
	tests := []struct {
		name  string
		call  func(ctx context.Context) error
		code  codes.Code
		field string
	}{
		{"missing fluid", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.Fluid = nil }), inv, "fluid"},
		{"model unspecified", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.Fluid.Model = 0 }), inv, "fluid.model"},
		{"model out of enum", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.Fluid.Model = 99 }), inv, "fluid.model"},
		{"no components", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.Fluid.Components = nil }), inv, "fluid.components"},
		{"too many components", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid = fluidOf(fugadv1.Model_MODEL_SRK, "methane", "ethane", "propane", "nitrogen", "oxygen", "argon")
		}), inv, "fluid.components"},
		{"unknown component", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[2] = &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: "propanne"}}
		}), inv, "fluid.components[2].id"},
		{"empty component id", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[1] = &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: ""}}
		}), inv, "fluid.components[1].id"},
		{"component source missing", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.Fluid.Components[0] = &fugadv1.ComponentSpec{} }), inv, "fluid.components[0]"},
		{"duplicate component", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[2] = &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: "CH4"}}
		}), inv, "fluid.components[2].id"},
		{"user Tc NaN", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[2] = userComp("my-oil", math.NaN(), 3e6, 0.3, 0.1)
		}), inv, "fluid.components[2].user.critical_temperature_k"},
		{"user Pc negative", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[2] = userComp("my-oil", 500, -3e6, 0.3, 0.1)
		}), inv, "fluid.components[2].user.critical_pressure_pa"},
		{"user omega Inf", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[2] = userComp("my-oil", 500, 3e6, math.Inf(1), 0.1)
		}), inv, "fluid.components[2].user.acentric_factor"},
		{"user id is a library name", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[2] = userComp("propane", 500, 3e6, 0.3, 0.1)
		}), inv, "fluid.components[2].user.id"},
		{"pseudo SG out of range", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[2] = &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Pseudo{Pseudo: &fugadv1.PseudoComponent{
				Id: "c7-cut", SpecificGravity: 3, Characterisation: &fugadv1.PseudoComponent_NormalBoilingPointK{NormalBoilingPointK: 370}}}}
		}), inv, "fluid.components[2].pseudo.specific_gravity"},
		{"pseudo without characterisation", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.Components[2] = &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Pseudo{Pseudo: &fugadv1.PseudoComponent{Id: "c7-cut", SpecificGravity: 0.72}}}
		}), inv, "fluid.components[2].pseudo.characterisation"},
		{"kij index out of range", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.InteractionParameters = []*fugadv1.InteractionParameter{{I: 0, J: 7, K0: 0.01}}
		}), inv, "fluid.interaction_parameters[0].j"},
		{"kij on diagonal", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.InteractionParameters = []*fugadv1.InteractionParameter{{I: 1, J: 1}}
		}), inv, "fluid.interaction_parameters[0].j"},
		{"kij k0 NaN", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.InteractionParameters = []*fugadv1.InteractionParameter{{I: 0, J: 1, K0: math.NaN()}}
		}), inv, "fluid.interaction_parameters[0].k0"},
		{"kij duplicate pair", fug(func(r *fugadv1.FugacityCoefficientsRequest) {
			r.Fluid.InteractionParameters = []*fugadv1.InteractionParameter{{I: 0, J: 1, K0: 0.01}, {I: 1, J: 0, K0: 0.02}}
		}), inv, "fluid.interaction_parameters[1]"},
		{"temperature NaN", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.TemperatureK = math.NaN() }), inv, "temperature_k"},
		{"temperature negative", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.TemperatureK = -5 }), inv, "temperature_k"},
		{"pressure +Inf", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.PressurePa = math.Inf(1) }), inv, "pressure_pa"},
		{"pressure zero", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.PressurePa = 0 }), inv, "pressure_pa"},
		{"composition length", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.MoleFractions = []float64{0.5, 0.5} }), inv, "mole_fractions"},
		{"composition missing", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.MoleFractions = nil }), inv, "mole_fractions"},
		{"composition negative", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.MoleFractions = []float64{1.1, -0.1, 0} }), inv, "mole_fractions[1]"},
		{"composition NaN", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.MoleFractions = []float64{0.5, math.NaN(), 0.5} }), inv, "mole_fractions[1]"},
		{"composition sum off", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.MoleFractions = []float64{85, 10, 5} }), inv, "mole_fractions"},
		{"composition sum slightly off", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.MoleFractions = []float64{0.85, 0.10, 0.0501} }), inv, "mole_fractions"},
		{"root unspecified", fug(func(r *fugadv1.FugacityCoefficientsRequest) { r.Root = 0 }), inv, "root"},
		{"flash missing state", flash(func(r *fugadv1.FlashRequest) { r.State = nil }), inv, "state"},
		{"flash missing specification", flash(func(r *fugadv1.FlashRequest) { r.State.Specification = nil }), inv, "state.specification"},
		{"flash tp temperature Inf", flash(func(r *fugadv1.FlashRequest) { r.State.GetTp().TemperatureK = math.Inf(-1) }), inv, "state.tp.temperature_k"},
		{"flash ph enthalpy NaN", flash(func(r *fugadv1.FlashRequest) {
			r.State.Specification = &fugadv1.FlashState_Ph{Ph: &fugadv1.PressureEnthalpy{PressurePa: 1e6, MolarEnthalpyJPerMol: math.NaN()}}
		}), inv, "state.ph.molar_enthalpy_j_per_mol"},
		{"flash vapour fraction above 1", flash(func(r *fugadv1.FlashRequest) {
			r.State.Specification = &fugadv1.FlashState_PVapourFraction{PVapourFraction: &fugadv1.PressureVapourFraction{PressurePa: 1e6, VapourFraction: 1.5}}
		}), inv, "state.p_vapour_fraction.vapour_fraction"},
		{"flash uv volume negative", flash(func(r *fugadv1.FlashRequest) {
			r.State.Specification = &fugadv1.FlashState_Uv{Uv: &fugadv1.InternalEnergyVolume{MolarInternalEnergyJPerMol: -1000, MolarVolumeM3PerMol: -1}}
		}), inv, "state.uv.molar_volume_m3_per_mol"},
		{"flash warm start K length", flash(func(r *fugadv1.FlashRequest) { r.State.WarmStart = &fugadv1.WarmStart{KValues: []float64{2, 0.5}} }), inv, "state.warm_start.k_values"},
		{"flash warm start K zero", flash(func(r *fugadv1.FlashRequest) { r.State.WarmStart = &fugadv1.WarmStart{KValues: []float64{2, 0, 0.5}} }), inv, "state.warm_start.k_values[1]"},
		{"flash tolerance too loose", flash(func(r *fugadv1.FlashRequest) { r.Options = &fugadv1.SolverOptions{Tolerance: 0.1} }), inv, "options.tolerance"},
		{"flash max iterations", flash(func(r *fugadv1.FlashRequest) { r.Options = &fugadv1.SolverOptions{MaxIterations: 1e6} }), inv, "options.max_iterations"},
		{"flash max iterations below the floor", flash(func(r *fugadv1.FlashRequest) { r.Options = &fugadv1.SolverOptions{MaxIterations: 9} }), inv, "options.max_iterations"},
		{"flash warm start phase composition", flash(func(r *fugadv1.FlashRequest) {
			r.State.WarmStart = &fugadv1.WarmStart{Phases: []*fugadv1.PhaseEstimate{{Amount: 0.5, MoleFractions: []float64{0.5, 0.5}}}}
		}), inv, "state.warm_start.phases[0].mole_fractions"},
		{"batch no states", batch(func(r *fugadv1.FlashBatchRequest) { r.States = nil }), inv, "states"},
		{"batch over limit", batch(func(r *fugadv1.FlashBatchRequest) {
			r.States = []*fugadv1.FlashState{tpState(200, 1e6), tpState(200, 1e6), tpState(200, 1e6), tpState(200, 1e6)}
		}), inv, "states"},
		{"batch default composition sum", batch(func(r *fugadv1.FlashBatchRequest) { r.MoleFractions = []float64{1, 1, 1} }), inv, "mole_fractions"},
		{"batch bad fluid", batch(func(r *fugadv1.FlashBatchRequest) { r.Fluid.Model = 0 }), inv, "fluid.model"},
		{"saturation type unspecified", sat(func(r *fugadv1.SaturationPointRequest) { r.Type = 0 }), inv, "type"},
		{"saturation nothing specified", sat(func(r *fugadv1.SaturationPointRequest) { r.Specified = nil }), inv, "specified"},
		{"saturation pressure NaN", sat(func(r *fugadv1.SaturationPointRequest) {
			r.Specified = &fugadv1.SaturationPointRequest_PressurePa{PressurePa: math.NaN()}
		}), inv, "pressure_pa"},
		{"saturation warm start temperature", sat(func(r *fugadv1.SaturationPointRequest) {
			r.WarmStart = &fugadv1.WarmStart{TemperatureK: proto.Float64(-1)}
		}), inv, "warm_start.temperature_k"},
		{"envelope max points over limit", env(func(r *fugadv1.PhaseEnvelopeRequest) { r.MaxPoints = 51 }), inv, "max_points"},
		{"envelope start above maximum", env(func(r *fugadv1.PhaseEnvelopeRequest) { r.StartPressurePa = 2e7; r.MaximumPressurePa = 1e7 }), inv, "maximum_pressure_pa"},
		{"envelope composition missing", env(func(r *fugadv1.PhaseEnvelopeRequest) { r.MoleFractions = nil }), inv, "mole_fractions"},
		{"list components filter too long", func(ctx context.Context) error {
			_, err := c.ListComponents(ctx, &fugadv1.ListComponentsRequest{Filter: strings.Repeat("x", 65)})
			return err
		}, inv, "filter"},
	}
	if len(tests) < 30 {
		t.Fatalf("only %d cases", len(tests))
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			wantViolation(t, tc.call(testCtx(t)), tc.code, tc.field)
		})
	}
}

// TestUnknownComponentSuggests checks that an unknown id is answered with
// close matches and the UNKNOWN_COMPONENT reason.
func TestUnknownComponentSuggests(t *testing.T) {
	e := newEnv(t, envOptions{})
	r := fugacityReq()
	r.Fluid.Components[2] = &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: "propanne"}}
	_, err := e.client.FugacityCoefficients(testCtx(t), r)
	_, ei, br := details(t, err)
	if ei.GetReason() != ReasonUnknownComp {
		t.Errorf("reason = %q, want %q", ei.GetReason(), ReasonUnknownComp)
	}
	if d := br.GetFieldViolations()[0].GetDescription(); !strings.Contains(d, "propane") {
		t.Errorf("description %q does not suggest propane", d)
	}
}

// TestLimitReason checks the LIMIT_EXCEEDED reason of a request over a
// configured limit.
func TestLimitReason(t *testing.T) {
	e := newEnv(t, envOptions{cfg: Config{Limits: Limits{MaxBatchStates: 1}}})
	_, err := e.client.FlashBatch(testCtx(t), batchReq())
	_, ei, _ := details(t, err)
	if ei.GetReason() != ReasonLimitExceeded {
		t.Errorf("reason = %q, want %q", ei.GetReason(), ReasonLimitExceeded)
	}
}

// TestCompositionNormalised checks the documented rule: a sum within 1e-6
// of 1 is normalised, so the answer equals that of the exact composition.
func TestCompositionNormalised(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	exact, err := e.client.FugacityCoefficients(ctx, fugacityReq())
	if err != nil {
		t.Fatal(err)
	}
	r := fugacityReq()
	r.MoleFractions = []float64{0.85 * (1 + 5e-7), 0.10 * (1 + 5e-7), 0.05 * (1 + 5e-7)}
	near, err := e.client.FugacityCoefficients(ctx, r)
	if err != nil {
		t.Fatalf("sum 1+5e-7 rejected: %v", err)
	}
	for i := range exact.GetLnFugacityCoefficients() {
		a, b := exact.GetLnFugacityCoefficients()[i], near.GetLnFugacityCoefficients()[i]
		if math.Abs(a-b) > 1e-12 {
			t.Errorf("ln φ[%d]: %v (exact) vs %v (normalised)", i, a, b)
		}
	}
}

// phState is a P–H state of the test gas, a specification without a
// solver in this build.
func phState() *fugadv1.FlashState {
	return &fugadv1.FlashState{MoleFractions: gasX, Specification: &fugadv1.FlashState_Ph{Ph: &fugadv1.PressureEnthalpy{PressurePa: 4e6, MolarEnthalpyJPerMol: -80000}}}
}

// TestUnimplementedValidatesFirst checks that the endpoints and
// specifications without a solver reject bad input with INVALID_ARGUMENT
// and answer good input with UNIMPLEMENTED (never invented numbers).
// TestValidationBeforeSolve: a valid request of each solver endpoint is
// answered with a result, an invalid one with INVALID_ARGUMENT naming the
// field, and in a batch only the bad state fails.
func TestValidationBeforeSolve(t *testing.T) {
	e := newEnv(t, envOptions{})
	ctx := testCtx(t)
	c := e.client
	good := map[string]func() error{
		"Flash": func() error {
			_, err := c.Flash(ctx, &fugadv1.FlashRequest{Fluid: gasFluid(), State: phState()})
			return err
		},
		"SaturationPoint": func() error { _, err := c.SaturationPoint(ctx, satReq()); return err },
		"PhaseEnvelope":   func() error { _, err := c.PhaseEnvelope(ctx, envReq()); return err },
	}
	for name, call := range good {
		if err := call(); err != nil {
			t.Errorf("%s(valid) = %v, want a result", name, err)
		}
	}
	bad := flashReq()
	bad.State.GetTp().PressurePa = math.NaN()
	_, err := c.Flash(ctx, bad)
	wantViolation(t, err, codes.InvalidArgument, "state.tp.pressure_pa")

	// A batch: the call succeeds, each item carries its own status; the bad
	// state gets INVALID_ARGUMENT naming states[1], the good ones (P–H) a
	// result.
	br := batchReq()
	br.States = []*fugadv1.FlashState{phState(), tpState(math.Inf(1), 4e6), phState()}
	resp, err := c.FlashBatch(ctx, br)
	if err != nil {
		t.Fatal(err)
	}
	if len(resp.GetItems()) != 3 {
		t.Fatalf("%d items, want 3", len(resp.GetItems()))
	}
	for i, it := range resp.GetItems() {
		if i == 1 {
			wantViolation(t, statusErr(it.GetStatus()), codes.InvalidArgument, "states[1].tp.temperature_k")
			if it.GetResult() != nil {
				t.Errorf("item 1: a result beside INVALID_ARGUMENT")
			}
			continue
		}
		if codes.Code(it.GetStatus().GetCode()) != codes.OK || it.GetResult() == nil {
			t.Errorf("item %d: status %v, want OK with a result", i, it.GetStatus())
		}
	}
}
