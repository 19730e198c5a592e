package main

import (
	"fmt"
	"math"
	"math/rand/v2"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
)

// kind is the kind of calculation a stream asks for every timestep.
type kind int

const (
	kindTP  kind = iota // T–P flash: separators, coolers, pipelines
	kindPH              // P–H flash: valve and compressor outlets
	kindSat             // saturation point: dew-point and bubble-point analysers
	kindEnv             // phase envelope of a stream
	kindFug             // fugacity coefficients of one phase
	numKinds
)

// kindNames are the names used in --mix.
var kindNames = [numKinds]string{"tp", "ph", "sat", "env", "fug"}

// plantComponents is the component slate of every plant's fluid: a
// natural gas with its condensate, from the component library.
var plantComponents = []string{
	"nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane",
	"n-butane", "isopentane", "n-pentane", "n-hexane", "n-heptane",
}

// Feed compositions of the fictional "Gannet Reach" gas plant and its
// sister plants (invented for this workload; each plant perturbs them with
// its own seed). The order is that of plantComponents.
var (
	// leanGas: sales-gas-like, dew points well below ambient.
	leanGas = []float64{0.012, 0.015, 0.905, 0.045, 0.013, 0.003, 0.003, 0.0015, 0.001, 0.0008, 0.0007}
	// richGas: inlet gas carrying condensate, two-phase in the separators.
	richGas = []float64{0.010, 0.025, 0.780, 0.080, 0.045, 0.012, 0.015, 0.008, 0.007, 0.008, 0.010}
	// ngl: stabiliser feed, a liquid with a bubble point near ambient.
	ngl = []float64{0.0005, 0.004, 0.040, 0.120, 0.300, 0.110, 0.160, 0.070, 0.070, 0.065, 0.0605}
)

// walk is a bounded random walk: each step adds step·N(0,1) and reflects
// the value back into [lo, hi].
type walk struct{ v, lo, hi, step float64 }

func newWalk(r *rand.Rand, lo, hi, relStep float64) walk {
	return walk{v: lo + (hi-lo)*r.Float64(), lo: lo, hi: hi, step: relStep * (hi - lo)}
}

func (w *walk) next(r *rand.Rand) {
	v := w.v + w.step*r.NormFloat64()
	for v < w.lo || v > w.hi {
		if v < w.lo {
			v = 2*w.lo - v
		}
		if v > w.hi {
			v = 2*w.hi - v
		}
	}
	w.v = v
}

// stream is one measured stream of a plant.
type stream struct {
	kind kind
	unit string // what the stream is, for the README's description
	z    []float64
	// Inlet conditions, K and Pa (the state itself for kindTP, kindSat,
	// kindFug).
	t, p walk
	// ratio is the outlet/inlet pressure ratio of a valve (< 1) or a
	// compressor (> 1), for kindPH.
	ratio float64
	// bubble selects a bubble point at the stream temperature; otherwise a
	// dew point at the stream pressure (kindSat).
	bubble bool
	r      *rand.Rand
	// warm is the warm start returned by the last result, sent back with
	// the next state when warm starts are on.
	warm *fugadv1.WarmStart
	// h is the outlet enthalpy of the current timestep (kindPH), J/mol.
	h float64
}

// plant is one client's fictional plant: a fluid and its streams.
type plant struct {
	id      int
	fluid   *fugadv1.Fluid
	mix     *eos.Mixture
	ws      *eos.Workspace
	streams []*stream
	byKind  [numKinds][]*stream
	steady  float64 // probability that a stream does not move in a timestep
	r       *rand.Rand
}

// perturb returns base with each fraction multiplied by exp(σ·N(0,1)),
// normalised.
func perturb(r *rand.Rand, base []float64, sigma float64) []float64 {
	z := make([]float64, len(base))
	sum := 0.0
	for i, b := range base {
		z[i] = b * math.Exp(sigma*r.NormFloat64())
		sum += z[i]
	}
	for i := range z {
		z[i] /= sum
	}
	return z
}

// pickKind draws a kind with the weights of mix.
func pickKind(r *rand.Rand, mix [numKinds]float64) kind {
	total := 0.0
	for _, w := range mix {
		total += w
	}
	u := r.Float64() * total
	for k, w := range mix {
		if u < w {
			return kind(k)
		}
		u -= w
	}
	for k := numKinds - 1; k >= 0; k-- {
		if mix[k] > 0 {
			return k
		}
	}
	return kindTP
}

// newPlant builds plant id of the run seeded by seed: its stream count is
// drawn from [minStreams, maxStreams], each stream's kind from mix, and
// every random number of the plant comes from its own PCG stream, so a
// seed gives the same traffic on every run.
func newPlant(seed uint64, id, minStreams, maxStreams int, mix [numKinds]float64, steady float64) (*plant, error) {
	r := rand.New(rand.NewPCG(seed, uint64(id)))
	comps := make([]component.Component, len(plantComponents))
	fl := &fugadv1.Fluid{Model: fugadv1.Model_MODEL_PR78}
	for i, name := range plantComponents {
		c, err := component.Lookup(name)
		if err != nil {
			return nil, err
		}
		comps[i] = c
		fl.Components = append(fl.Components, &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: name}})
	}
	mx, err := eos.NewMixture(eos.PR78, comps, eos.Options{})
	if err != nil {
		return nil, err
	}
	p := &plant{id: id, fluid: fl, mix: mx, ws: mx.NewWorkspace(), steady: steady, r: r}
	n := minStreams
	if maxStreams > minStreams {
		n += r.IntN(maxStreams - minStreams + 1)
	}
	for i := range n {
		s := &stream{kind: pickKind(r, mix), r: rand.New(rand.NewPCG(seed, uint64(id)<<32|uint64(i)+1))}
		// Relative steps of 0.2 % of each range per timestep: a slow
		// drift, as between the timesteps of a plant model.
		const step = 0.002
		switch s.kind {
		case kindTP:
			switch i % 3 {
			case 0:
				s.unit, s.z = "inlet separator", perturb(s.r, richGas, 0.1)
				s.t, s.p = newWalk(s.r, 285, 315, step), newWalk(s.r, 5e6, 8e6, step)
			case 1:
				s.unit, s.z = "low-temperature separator", perturb(s.r, richGas, 0.1)
				s.t, s.p = newWalk(s.r, 240, 265, step), newWalk(s.r, 5e6, 7e6, step)
			default:
				s.unit, s.z = "export pipeline", perturb(s.r, leanGas, 0.1)
				s.t, s.p = newWalk(s.r, 275, 310, step), newWalk(s.r, 6e6, 10e6, step)
			}
		case kindPH:
			if i%2 == 0 {
				s.unit, s.z = "Joule–Thomson valve", perturb(s.r, richGas, 0.1)
				s.t, s.p = newWalk(s.r, 285, 310, step), newWalk(s.r, 7e6, 9e6, step)
				s.ratio = 0.45 + 0.2*s.r.Float64()
			} else {
				s.unit, s.z = "recompressor", perturb(s.r, leanGas, 0.1)
				s.t, s.p = newWalk(s.r, 295, 315, step), newWalk(s.r, 2e6, 3.5e6, step)
				s.ratio = 1.8 + 0.6*s.r.Float64()
			}
		case kindSat:
			if i%3 == 2 {
				s.unit, s.z, s.bubble = "stabiliser feed bubble point", perturb(s.r, ngl, 0.1), true
				s.t, s.p = newWalk(s.r, 280, 320, step), walk{}
			} else {
				s.unit, s.z = "sales-gas dew point", perturb(s.r, leanGas, 0.1)
				s.t, s.p = walk{}, newWalk(s.r, 2e6, 6e6, step)
			}
		case kindEnv:
			s.unit, s.z = "phase envelope", perturb(s.r, richGas, 0.1)
		case kindFug:
			s.unit, s.z = "fugacity of separator gas", perturb(s.r, richGas, 0.1)
			s.t, s.p = newWalk(s.r, 285, 315, step), newWalk(s.r, 5e6, 8e6, step)
		}
		p.streams = append(p.streams, s)
		p.byKind[s.kind] = append(p.byKind[s.kind], s)
	}
	return p, nil
}

// advance moves every stream one timestep: a steady stream keeps its
// state (and so repeats its request), the others take one step of their
// walks. Outlet enthalpies of P–H streams are computed from the inlet
// state with the equation of state, on the minimum-Gibbs root.
func (p *plant) advance() error {
	for _, s := range p.streams {
		if s.r.Float64() < p.steady {
			continue
		}
		if s.t.hi > 0 {
			s.t.next(s.r)
		}
		if s.p.hi > 0 {
			s.p.next(s.r)
		}
		if s.kind == kindPH {
			h, err := p.outletEnthalpy(s)
			if err != nil {
				return err
			}
			s.h = h
		}
	}
	return nil
}

// outletEnthalpy is H of a valve outlet (isenthalpic: the inlet H) or of
// a compressor outlet (H at the outlet pressure and T_in·ratio^0.28, a
// polytropic outlet temperature of common practice for natural gas with
// n ≈ 1.4).
func (p *plant) outletEnthalpy(s *stream) (float64, error) {
	t, pr := s.t.v, s.p.v
	if s.ratio > 1 {
		t, pr = t*math.Pow(s.ratio, 0.28), pr*s.ratio
	}
	props, err := p.mix.Properties(p.ws, t, pr, s.z, eos.RootMinGibbs)
	if err != nil {
		return 0, fmt.Errorf("plant %d, %s: %w", p.id, s.unit, err)
	}
	return props.H, nil
}

// state returns the flash state of a kindTP or kindPH stream.
func (s *stream) state(warm bool) *fugadv1.FlashState {
	st := &fugadv1.FlashState{MoleFractions: s.z}
	if s.kind == kindPH {
		st.Specification = &fugadv1.FlashState_Ph{Ph: &fugadv1.PressureEnthalpy{PressurePa: s.p.v * s.ratio, MolarEnthalpyJPerMol: s.h}}
	} else {
		st.Specification = &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: s.t.v, PressurePa: s.p.v}}
	}
	if warm {
		st.WarmStart = s.warm
	}
	return st
}

// saturation returns the saturation-point request of a kindSat stream.
func (s *stream) saturation(fl *fugadv1.Fluid, warm bool) *fugadv1.SaturationPointRequest {
	req := &fugadv1.SaturationPointRequest{Fluid: fl, MoleFractions: s.z}
	if s.bubble {
		req.Type = fugadv1.SaturationType_SATURATION_TYPE_BUBBLE
		req.Specified = &fugadv1.SaturationPointRequest_TemperatureK{TemperatureK: s.t.v}
	} else {
		req.Type = fugadv1.SaturationType_SATURATION_TYPE_DEW
		req.Specified = &fugadv1.SaturationPointRequest_PressurePa{PressurePa: s.p.v}
	}
	if warm {
		req.WarmStart = s.warm
	}
	return req
}

// envelope returns the phase-envelope request of a kindEnv stream.
func (s *stream) envelope(fl *fugadv1.Fluid) *fugadv1.PhaseEnvelopeRequest {
	return &fugadv1.PhaseEnvelopeRequest{Fluid: fl, MoleFractions: s.z}
}

// fugacity returns the fugacity-coefficient request of a kindFug stream.
func (s *stream) fugacity(fl *fugadv1.Fluid) *fugadv1.FugacityCoefficientsRequest {
	return &fugadv1.FugacityCoefficientsRequest{
		Fluid: fl, TemperatureK: s.t.v, PressurePa: s.p.v, MoleFractions: s.z,
		Root: fugadv1.RootChoice_ROOT_CHOICE_MINIMUM_GIBBS,
	}
}
