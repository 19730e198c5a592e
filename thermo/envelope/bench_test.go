package envelope

import (
	"testing"

	"github.com/fugad/fugad/thermo/eos"
)

// gas30 is a fictional 30-component natural gas (our own stream): the
// library's inerts and hydrocarbons to n-undecane with mole fractions
// decaying with carbon number.
func gas30(b testing.TB) (*eos.Mixture, []float64) {
	ids := []string{"nitrogen", "carbon-dioxide", "hydrogen-sulfide", "methane", "ethane", "propane", "isobutane", "n-butane",
		"neopentane", "isopentane", "n-pentane", "2,2-dimethylbutane", "2,3-dimethylbutane", "2-methylpentane", "3-methylpentane",
		"n-hexane", "cyclopentane", "cyclohexane", "methylcyclohexane", "benzene", "toluene", "ethylbenzene", "o-xylene", "m-xylene",
		"p-xylene", "n-heptane", "n-octane", "n-nonane", "n-decane", "n-undecane"}
	z := []float64{0.012, 0.018, 0.002, 0.85, 0.055, 0.025, 0.005, 0.007, 0.0003, 0.002, 0.002, 0.0002, 0.0002, 0.0006, 0.0005,
		0.0012, 0.0003, 0.0006, 0.0004, 0.0003, 0.0004, 0.0001, 0.0001, 0.0001, 0.0001, 0.0008, 0.0005, 0.0003, 0.0002, 0.0001}
	return mixture(b, eos.PR78, lookup(b, ids...), eos.Options{}), z
}

func benchmarkEnvelope(b *testing.B, mx *eos.Mixture, z []float64, o EnvelopeOptions) {
	s := newSolver(b, mx)
	env, err := s.Envelope(bg, z, o)
	if err != nil || !env.Closed() {
		b.Fatal(err, env.Report.Stop)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := s.Envelope(bg, z, o); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(len(env.Points)), "points")
	b.ReportMetric(float64(env.Report.LnPhiEvaluations), "lnphi/op")
	b.ReportMetric(float64(env.Report.StabilityEvaluations), "stab-lnphi/op")
}

func BenchmarkEnvelope10(b *testing.B) {
	f := streams(b)[0]
	benchmarkEnvelope(b, f.mx, f.z, EnvelopeOptions{})
}

// BenchmarkEnvelope10NoStability is the same trace without the
// third-phase test, to measure what the test costs.
func BenchmarkEnvelope10NoStability(b *testing.B) {
	f := streams(b)[0]
	benchmarkEnvelope(b, f.mx, f.z, EnvelopeOptions{NoStabilityCheck: true})
}

// BenchmarkEnvelopeCO2Rich6 is the CO2-rich stream, 45 of whose points are
// metastable.
func BenchmarkEnvelopeCO2Rich6(b *testing.B) {
	f := streams(b)[2]
	benchmarkEnvelope(b, f.mx, f.z, EnvelopeOptions{})
}

func BenchmarkEnvelopeCondensate11(b *testing.B) {
	f := streams(b)[1]
	benchmarkEnvelope(b, f.mx, f.z, EnvelopeOptions{})
}

func BenchmarkEnvelope30(b *testing.B) {
	mx, z := gas30(b)
	benchmarkEnvelope(b, mx, z, EnvelopeOptions{})
}

func benchmarkSaturation(b *testing.B, dew bool) {
	f := streams(b)[0]
	s := newSolver(b, f.mx)
	p := NewPoint(f.mx)
	b.ReportAllocs()
	for b.Loop() {
		var err error
		if dew {
			err = s.DewPressure(bg, 240, f.z, Hint{}, p)
		} else {
			err = s.BubblePressure(bg, 180, f.z, Hint{}, p)
		}
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(p.Report.LnPhiEvaluations), "lnphi/op")
}

func BenchmarkSaturationDewPressure10(b *testing.B)    { benchmarkSaturation(b, true) }
func BenchmarkSaturationBubblePressure10(b *testing.B) { benchmarkSaturation(b, false) }

// BenchmarkSaturationLnPhi10 is one ln φ evaluation with all derivatives
// of the same fluid, the unit the saturation figures are measured in.
func BenchmarkSaturationLnPhi10(b *testing.B) {
	f := streams(b)[0]
	ws := f.mx.NewWorkspace()
	out := f.mx.NewFugacity()
	b.ReportAllocs()
	for b.Loop() {
		if err := f.mx.Fugacity(ws, 240, 3e6, f.z, eos.RootVapour, eos.WantAll, out); err != nil {
			b.Fatal(err)
		}
	}
}
