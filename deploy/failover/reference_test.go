package failover

import (
	"context"
	"fmt"
	"math"
	"testing"

	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// The fluid of the load: an invented lean gas-condensate feed of a
// fictional gathering station ("Harrow Flats compressor inlet"), PR78 with
// the library's default interaction parameters, sent by component id.
var (
	loadComponents = []string{"nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "n-pentane", "n-hexane", "n-heptane", "n-decane"}
	loadFeed       = []float64{0.012, 0.021, 0.742, 0.085, 0.052, 0.011, 0.019, 0.015, 0.013, 0.016, 0.014}
)

// loadFluid is the wire form of the load's fluid.
func loadFluid() *fugadv1.Fluid {
	fl := &fugadv1.Fluid{Model: fugadv1.Model_MODEL_PR78}
	for _, id := range loadComponents {
		fl.Components = append(fl.Components, &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: id}})
	}
	return fl
}

// refState is one state of the load with its in-process answer.
type refState struct {
	T, P  float64
	want  *flash.Result
	first []byte // first answer's bytes (report.from_cache cleared), set by the load
}

// loadStates flashes a grid of states of the load's feed in-process:
// 260–460 K and 0.5–9.5 MPa, which crosses the two-phase region and both
// single-phase sides. Each state gets its own Result.
func loadStates(t testing.TB) []*refState {
	t.Helper()
	comps := make([]component.Component, len(loadComponents))
	for i, id := range loadComponents {
		c, err := component.Lookup(id)
		if err != nil {
			t.Fatal(err)
		}
		comps[i] = c
	}
	mx, err := eos.NewMixture(eos.PR78, comps, eos.Options{})
	if err != nil {
		t.Fatal(err)
	}
	ws := flash.NewWorkspace(mx)
	var states []*refState
	phases := map[int]int{}
	for i := range 8 {
		T := 260 + 200*float64(i)/7
		for j := range 8 {
			P := 0.5e6 + 9e6*float64(j)/7
			res := flash.NewResult(mx)
			if err := ws.PT(context.Background(), T, P, loadFeed, flash.Options{}, nil, res); err != nil {
				t.Fatalf("in-process flash at %g K, %g Pa: %v", T, P, err)
			}
			phases[len(res.Phases)]++
			states = append(states, &refState{T: T, P: P, want: res})
		}
	}
	if phases[1] == 0 || phases[2] == 0 {
		t.Fatalf("the load's states should cover one- and two-phase results, got phase counts %v", phases)
	}
	return states
}

// request is the Flash request of state s.
func (s *refState) request(bypassCache bool) *fugadv1.FlashRequest {
	return &fugadv1.FlashRequest{
		Fluid: loadFluid(),
		State: &fugadv1.FlashState{
			MoleFractions: loadFeed,
			Specification: &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: s.T, PressurePa: s.P}},
		},
		BypassCache: bypassCache,
	}
}

// relTol is the agreement demanded between a wire answer and the
// in-process flash: the server runs the same code on the same input, so
// anything looser would hide a translation error.
const relTol = 1e-12

func agree(a, b float64) bool {
	if a == b {
		return true
	}
	return math.Abs(a-b) <= relTol*math.Max(math.Abs(a), math.Abs(b))
}

// wireLabel maps a thermo phase label onto the wire enum.
func wireLabel(l flash.Label) fugadv1.PhaseLabel {
	switch l {
	case flash.LabelVapour:
		return fugadv1.PhaseLabel_PHASE_LABEL_VAPOUR
	case flash.LabelLiquid:
		return fugadv1.PhaseLabel_PHASE_LABEL_LIQUID
	case flash.LabelAqueous:
		return fugadv1.PhaseLabel_PHASE_LABEL_AQUEOUS
	}
	return fugadv1.PhaseLabel_PHASE_LABEL_UNSPECIFIED
}

// check compares a wire result with the in-process one.
func (s *refState) check(got *fugadv1.FlashResult) error {
	w := s.want
	if got == nil {
		return fmt.Errorf("no result")
	}
	if !agree(got.GetTemperatureK(), w.T) || !agree(got.GetPressurePa(), w.P) {
		return fmt.Errorf("state %g K, %g Pa: answered for %g K, %g Pa", w.T, w.P, got.GetTemperatureK(), got.GetPressurePa())
	}
	if len(got.GetPhases()) != len(w.Phases) {
		return fmt.Errorf("state %g K, %g Pa: %d phases, in-process %d", w.T, w.P, len(got.GetPhases()), len(w.Phases))
	}
	var vf float64
	for k, wp := range w.Phases {
		gp := got.GetPhases()[k]
		if gp.GetLabel() != wireLabel(wp.Label) {
			return fmt.Errorf("state %g K, %g Pa: phase %d is %v, in-process %v", w.T, w.P, k, gp.GetLabel(), wp.Label)
		}
		if !agree(gp.GetAmount(), wp.Beta) {
			return fmt.Errorf("state %g K, %g Pa: phase %d amount %.17g, in-process %.17g", w.T, w.P, k, gp.GetAmount(), wp.Beta)
		}
		if len(gp.GetMoleFractions()) != len(wp.X) {
			return fmt.Errorf("state %g K, %g Pa: phase %d has %d mole fractions, want %d", w.T, w.P, k, len(gp.GetMoleFractions()), len(wp.X))
		}
		for i, x := range wp.X {
			if g := gp.GetMoleFractions()[i]; !agree(g, x) {
				return fmt.Errorf("state %g K, %g Pa: phase %d x[%s] = %.17g, in-process %.17g", w.T, w.P, k, loadComponents[i], g, x)
			}
		}
		if wp.Label == flash.LabelVapour {
			vf = wp.Beta
		}
	}
	if !agree(got.GetVapourFraction(), vf) {
		return fmt.Errorf("state %g K, %g Pa: vapour fraction %.17g, in-process %.17g", w.T, w.P, got.GetVapourFraction(), vf)
	}
	return nil
}

// canonical is the bytes of a result with report.from_cache cleared, for
// comparing answers of one state with each other.
func canonical(r *fugadv1.FlashResult) ([]byte, error) {
	c := proto.Clone(r).(*fugadv1.FlashResult)
	if c.GetReport() != nil {
		c.Report.FromCache = false
	}
	return proto.MarshalOptions{Deterministic: true}.Marshal(c)
}
