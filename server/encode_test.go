package server

import (
	"bytes"
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/prometheus/client_golang/prometheus"
	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/eos"
	"github.com/fugad/fugad/thermo/flash"
)

// TestAppendFlashResultMatchesMarshal holds the direct encoder of flash
// results to the bytes of marshalAnswer (deterministic proto.Marshal):
// for translated results of real flashes (one, two and three phases, with
// and without properties, as an answer and as the best estimate of a
// failed flash) and for random trees that set and clear every field the
// encoder writes, including negative zeros, multi-byte varints and
// lengths, and empty sub-messages.
func TestAppendFlashResultMatchesMarshal(t *testing.T) {
	s, err := New(Config{}, nil, prometheus.NewRegistry())
	if err != nil {
		t.Fatal(err)
	}
	check := func(name string, m *fugadv1.FlashResult) {
		t.Helper()
		want, err := marshalAnswer.Marshal(m)
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		got := appendFlashResult([]byte("prefix"), m)
		if !bytes.Equal(got[:6], []byte("prefix")) || !bytes.Equal(got[6:], want) {
			t.Errorf("%s: direct encoding differs from proto.Marshal\nwant %x\ngot  %x", name, want, got[6:])
		}
	}
	for _, c := range []struct {
		name   string
		ids    []string
		x      []float64
		T, P   float64
		phases int
	}{
		{"gas10 two phase", gas10IDs, gas10X, 250, 5e6, 2},
		{"gas10 vapour", gas10IDs, gas10X, 350, 5e6, 1},
		{"wet three phase", wetIDs, wetX, 310, 7e6, 3},
	} {
		mx := mixtureOf(t, eos.PR78, c.ids...)
		ws, res := flash.NewWorkspace(mx), flash.NewResult(mx)
		if err := ws.PT(context.Background(), c.T, c.P, normalised(c.x), flash.Options{}, nil, res); err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if len(res.Phases) != c.phases {
			t.Fatalf("%s: %d phases, want %d", c.name, len(res.Phases), c.phases)
		}
		for _, q := range []float64{0, 1e-9} {
			var w wireTP
			s.fillReport(&res.Report, q, &w.report)
			check(c.name, w.fill(res, &w.report.rep, true, false))
			check(c.name+" (owned)", s.flashResult(res, s.flashReport(&res.Report, q), true))
			best := s.flashResult(res, s.flashReport(&res.Report, q), false)
			best.WarmStart = nil
			check(c.name+" (best estimate)", best)
		}
	}

	rng := rand.New(rand.NewPCG(1, 2))
	num := func() float64 {
		switch rng.IntN(6) {
		case 0:
			return 0
		case 1:
			return math.Copysign(0, -1)
		case 2:
			return -rng.Float64() * 1e5
		}
		return rng.NormFloat64() * math.Pow(10, float64(rng.IntN(20)-10))
	}
	opt := func() *float64 {
		if rng.IntN(2) == 0 {
			return nil
		}
		x := num()
		return &x
	}
	nums := func() []float64 {
		n := []int{0, 1, 3, 10, 17, 40}[rng.IntN(6)]
		if n == 0 && rng.IntN(2) == 0 {
			return nil
		}
		xs := make([]float64, n)
		for i := range xs {
			xs[i] = num()
		}
		return xs
	}
	props := func() *fugadv1.Properties {
		if rng.IntN(4) == 0 {
			return nil
		}
		return &fugadv1.Properties{
			CompressibilityFactor: num(), MolarVolumeM3PerMol: num(), MolarDensityMolPerM3: num(), MassDensityKgPerM3: num(),
			MolarMassKgPerMol: num(), MolarEnthalpyJPerMol: num(), MolarEntropyJPerMolK: num(), MolarGibbsEnergyJPerMol: num(),
			MolarInternalEnergyJPerMol: num(), MolarIsobaricHeatCapacityJPerMolK: opt(), MolarIsochoricHeatCapacityJPerMolK: opt(),
			SpeedOfSoundMPerS: opt(), JouleThomsonCoefficientKPerPa: opt(), IsothermalCompressibilityPerPa: opt(),
		}
	}
	counter := func() uint64 {
		return []uint64{0, 1, 127, 128, 300, 1 << 20, math.MaxUint32, math.MaxUint64}[rng.IntN(8)]
	}
	for i := range 2000 {
		m := &fugadv1.FlashResult{TemperatureK: num(), PressurePa: num(), VapourFraction: num(), Overall: props(), KValues: nums()}
		for range rng.IntN(4) {
			m.Phases = append(m.Phases, &fugadv1.Phase{Label: fugadv1.PhaseLabel(rng.IntN(4)), Amount: num(), MoleFractions: nums(), LnFugacityCoefficients: nums(), Properties: props()})
		}
		if rng.IntN(4) > 0 {
			w := &fugadv1.WarmStart{KValues: nums(), TemperatureK: opt(), PressurePa: opt(), LnKTemperatureSensitivityPerK: nums(), LnKPressureSensitivityPerPa: nums(),
				MolarEnthalpyJPerMol: opt(), MolarEntropyJPerMolK: opt()}
			if rng.IntN(3) > 0 {
				w.StateDerivatives = &fugadv1.StateDerivatives{EnthalpyTemperatureDerivativeJPerMolK: num(), EnthalpyPressureDerivativeJPerMolPa: num(),
					VolumeTemperatureDerivativeM3PerMolK: num(), VolumePressureDerivativeM3PerMolPa: num()}
			}
			for range rng.IntN(4) {
				w.Phases = append(w.Phases, &fugadv1.PhaseEstimate{Label: fugadv1.PhaseLabel(rng.IntN(4)), Amount: num(), MoleFractions: nums()})
			}
			m.WarmStart = w
		}
		if rng.IntN(4) > 0 {
			r := &fugadv1.SolverReport{
				InitialEstimate: fugadv1.InitialEstimate(rng.IntN(4)), LnPhiEvaluations: counter(), FinalResidual: num(),
				MinimumTangentPlaneDistance: opt(), StabilityPhaseCount: uint32(counter()), Converged: rng.IntN(2) == 0,
				FromCache: rng.IntN(2) == 0, DataVersion: []string{"", "data-1", "ü/ß"}[rng.IntN(3)],
				ModelVersion: []string{"", "model-2"}[rng.IntN(2)], InputQuantizationRelativeTolerance: num(),
			}
			for range rng.IntN(5) {
				r.Stages = append(r.Stages, &fugadv1.StageReport{Stage: fugadv1.SolverStage(rng.IntN(9)), Iterations: uint32(counter()), Converged: rng.IntN(2) == 0})
			}
			m.Report = r
		}
		check("random tree", m)
		if t.Failed() {
			t.Fatalf("random tree %d: %v", i, m)
		}
	}
	// A decoded encoding is the message itself.
	m := s.flashResult(flashOf(t), s.flashReport(&flashOf(t).Report, 0), true)
	var back fugadv1.FlashResult
	if err := proto.Unmarshal(appendFlashResult(nil, m), &back); err != nil || !proto.Equal(&back, m) {
		t.Errorf("decoding the direct encoding: %v, equal %v", err, proto.Equal(&back, m))
	}
}

// flashOf is the two-phase gas10 flash at 250 K and 5 MPa.
func flashOf(t *testing.T) *flash.Result {
	mx := mixtureOf(t, eos.PR78, gas10IDs...)
	ws, res := flash.NewWorkspace(mx), flash.NewResult(mx)
	if err := ws.PT(context.Background(), 250, 5e6, normalised(gas10X), flash.Options{}, nil, res); err != nil {
		t.Fatal(err)
	}
	return res
}
