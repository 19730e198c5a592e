package server

import (
	"errors"
	"fmt"
	"strings"
	"sync"

	"google.golang.org/protobuf/proto"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
)

// compiledFluid is a validated Fluid compiled into an eos.Mixture, with
// pools of per-goroutine scratch memory. It is immutable and shared.
type compiledFluid struct {
	mixture *eos.Mixture
	ids     []string  // component ids in order, for reports
	scratch sync.Pool // of *evalScratch
	flashes sync.Pool // of *flashScratch
	// def is the deterministic encoding of the Fluid message the fluid was
	// compiled from: the fluid's identity in result-cache keys.
	def []byte
}

// evalScratch is the scratch memory of one evaluation.
type evalScratch struct {
	ws  *eos.Workspace
	fug *eos.Fugacity
}

func (cf *compiledFluid) getScratch() *evalScratch {
	if s, ok := cf.scratch.Get().(*evalScratch); ok {
		return s
	}
	return &evalScratch{ws: cf.mixture.NewWorkspace(), fug: cf.mixture.NewFugacity()}
}

func (cf *compiledFluid) putScratch(s *evalScratch) { cf.scratch.Put(s) }

// getFlash returns a T–P flash workspace with its result for this fluid,
// from the pool; putFlash returns it.
func (cf *compiledFluid) getFlash() *flashScratch {
	if s, ok := cf.flashes.Get().(*flashScratch); ok {
		return s
	}
	return newFlashScratch(cf.mixture)
}

func (cf *compiledFluid) putFlash(s *flashScratch) { cf.flashes.Put(s) }

// n returns the number of components.
func (cf *compiledFluid) n() int { return cf.mixture.N() }

// eosModel maps the wire enum to the eos model; ok is false for
// MODEL_UNSPECIFIED and unknown values.
func eosModel(m fugadv1.Model) (eos.Model, bool) {
	switch m {
	case fugadv1.Model_MODEL_PR76:
		return eos.PR76, true
	case fugadv1.Model_MODEL_PR78:
		return eos.PR78, true
	case fugadv1.Model_MODEL_SRK:
		return eos.SRK, true
	}
	return eos.ModelUnspecified, false
}

// fluidCheck is the outcome of checkFluid: the compiled fluid when one was
// found under the fluid's definition, else the resolved components to
// compile.
type fluidCheck struct {
	cf    *compiledFluid
	def   []byte // deterministic encoding of the Fluid; nil without caches
	model eos.Model
	comps []component.Component // nil when the fluid was bad
	opts  eos.Options
}

// checkFluid validates a Fluid, recording every violation under prefix
// (normally "fluid"). A fluid whose deterministic encoding is in the
// compiled-fluid cache passed these checks when it was compiled (they
// depend only on the message and the server's fixed limits), so it is
// taken as it is; any other is resolved by resolveFluid.
func (s *Server) checkFluid(v *violations, prefix string, fl *fugadv1.Fluid) fluidCheck {
	var fc fluidCheck
	if fl != nil && (s.fluids != nil || s.results != nil) {
		// A fluid the wire codec decoded from bytes it had seen comes with
		// its encoding (see codec.go), shared and read-only. Any other is
		// encoded into a pooled buffer: on a compiled-fluid hit the
		// compiled fluid carries its own copy, so nothing is allocated.
		def, memo := s.memo.def(fl)
		if !memo {
			bp := defBuffers.Get().(*[]byte)
			defer defBuffers.Put(bp)
			var err error
			if def, err = (proto.MarshalOptions{Deterministic: true}).MarshalAppend((*bp)[:0], fl); err != nil {
				def = nil
			} else {
				*bp = def
			}
		}
		if def != nil {
			if s.fluids != nil {
				if cf, ok := s.fluids.get(def); ok {
					fc.cf = cf
					return fc
				}
			}
			fc.def = def
			if !memo {
				fc.def = append([]byte(nil), def...)
			}
		}
	}
	fc.model, fc.comps, fc.opts = s.resolveFluid(v, prefix, fl)
	return fc
}

// defBuffers pools the buffers checkFluid encodes fluids into.
var defBuffers = sync.Pool{New: func() any { return new([]byte) }}

// resolveFluid validates a Fluid and resolves its components. It records
// every violation under prefix and returns the model, the components and
// the mixture options; comps is nil when anything was wrong.
func (s *Server) resolveFluid(v *violations, prefix string, fl *fugadv1.Fluid) (eos.Model, []component.Component, eos.Options) {
	var opts eos.Options
	if fl == nil {
		v.add(prefix, "required")
		return 0, nil, opts
	}
	model, ok := eosModel(fl.GetModel())
	if !ok {
		v.add(fieldPath(prefix, "model"), "required: one of MODEL_PR76, MODEL_PR78, MODEL_SRK (got %v)", fl.GetModel())
	}
	specs := fl.GetComponents()
	cfield := fieldPath(prefix, "components")
	n := len(specs)
	switch {
	case n == 0:
		v.add(cfield, "required: at least one component")
	case n > s.cfg.MaxComponents:
		v.limit(cfield, "has %d components, the limit is %d", n, s.cfg.MaxComponents)
		return 0, nil, opts
	}
	before := len(v.list)
	comps := make([]component.Component, n)
	seen := make(map[string]int, n)
	for i, cs := range specs {
		f := index(cfield, i)
		c, idField, ok := s.resolveComponent(v, f, cs)
		if !ok {
			continue
		}
		comps[i] = c
		key := strings.ToLower(c.ID)
		if j, dup := seen[key]; dup {
			v.add(idField, "duplicate of %s (id %q); each component may appear once", index(cfield, j), c.ID)
			continue
		}
		seen[key] = i
	}

	ips := fl.GetInteractionParameters()
	ipField := fieldPath(prefix, "interaction_parameters")
	if len(ips) > s.cfg.MaxInteractionParameters {
		v.limit(ipField, "has %d entries, the limit is %d", len(ips), s.cfg.MaxInteractionParameters)
	} else {
		pairs := make(map[[2]uint32]int, len(ips))
		for k, ip := range ips {
			f := index(ipField, k)
			i, j := ip.GetI(), ip.GetJ()
			good := true
			if int(i) >= n {
				v.add(fieldPath(f, "i"), "component index %d out of range [0, %d)", i, n)
				good = false
			}
			if int(j) >= n {
				v.add(fieldPath(f, "j"), "component index %d out of range [0, %d)", j, n)
				good = false
			}
			if good && i == j {
				v.add(fieldPath(f, "j"), "a component has no interaction parameter with itself (i = j = %d)", i)
				good = false
			}
			if checkFinite(v, fieldPath(f, "k0"), ip.GetK0()) && !(ip.GetK0() > -1 && ip.GetK0() < 1) {
				v.add(fieldPath(f, "k0"), "must satisfy |k0| < 1, got %g", ip.GetK0())
			}
			checkRange(v, fieldPath(f, "k1_per_k"), ip.GetK1PerK(), -0.01, 0.01, "1/K")
			if !good {
				continue
			}
			pair := [2]uint32{min(i, j), max(i, j)}
			if prev, dup := pairs[pair]; dup {
				v.add(f, "pair (%d, %d) already set by %s", i, j, index(ipField, prev))
				continue
			}
			pairs[pair] = k
			opts.Kij = append(opts.Kij, eos.KijOverride{I: int(i), J: int(j), K0: ip.GetK0(), K1: ip.GetK1PerK()})
		}
	}
	opts.VolumeTranslation = fl.GetVolumeTranslation()
	if len(v.list) > before || !ok || n == 0 {
		return model, nil, opts
	}
	return model, comps, opts
}

// resolveComponent turns one ComponentSpec into a component. It returns
// the path of the spec's id field, for duplicate reports.
func (s *Server) resolveComponent(v *violations, f string, cs *fugadv1.ComponentSpec) (component.Component, string, bool) {
	switch src := cs.GetSource().(type) {
	case *fugadv1.ComponentSpec_Id:
		idf := fieldPath(f, "id")
		before := len(v.list)
		checkID(v, idf, src.Id)
		if len(v.list) > before {
			return component.Component{}, idf, false
		}
		c, err := component.Lookup(src.Id)
		if err != nil {
			var ue *component.UnknownError
			if errors.As(err, &ue) {
				v.unknownComponent(idf, "unknown component %q%s", src.Id, closeMatches(ue.Suggestions))
			} else {
				v.add(idf, "%v", err)
			}
			return component.Component{}, idf, false
		}
		return c, idf, true
	case *fugadv1.ComponentSpec_User:
		return userComponent(v, fieldPath(f, "user"), src.User)
	case *fugadv1.ComponentSpec_Pseudo:
		return pseudoComponent(v, fieldPath(f, "pseudo"), src.Pseudo)
	}
	v.add(f, "required: one of id, user, pseudo")
	return component.Component{}, f, false
}

// userComponent validates caller-defined constants with
// component.Define, whose range checks are the single source of the
// accepted ranges; non-finite numbers are reported here first, all at once.
func userComponent(v *violations, f string, u *fugadv1.UserComponent) (component.Component, string, bool) {
	idf := fieldPath(f, "id")
	before := len(v.list)
	for _, n := range []struct {
		name string
		x    float64
	}{
		{"critical_temperature_k", u.GetCriticalTemperatureK()},
		{"critical_pressure_pa", u.GetCriticalPressurePa()},
		{"acentric_factor", u.GetAcentricFactor()},
		{"molar_mass_kg_per_mol", u.GetMolarMassKgPerMol()},
		{"enthalpy_of_formation_j_per_mol", u.GetEnthalpyOfFormationJPerMol()},
		{"critical_volume_m3_per_mol", u.GetCriticalVolumeM3PerMol()},
		{"normal_boiling_point_k", u.GetNormalBoilingPointK()},
		{"specific_gravity", u.GetSpecificGravity()},
		{"rackett_compressibility", u.GetRackettCompressibility()},
	} {
		checkFinite(v, fieldPath(f, n.name), n.x)
	}
	d := component.Definition{
		ID:        u.GetId(),
		MolarMass: u.GetMolarMassKgPerMol(),
		Tc:        u.GetCriticalTemperatureK(),
		Pc:        u.GetCriticalPressurePa(),
		Omega:     u.GetAcentricFactor(),
		Vc:        u.GetCriticalVolumeM3PerMol(),
		ZRA:       u.GetRackettCompressibility(),
		Tb:        u.GetNormalBoilingPointK(),
		SG:        u.GetSpecificGravity(),
		Hf:        u.GetEnthalpyOfFormationJPerMol(),
		Source:    "user-defined",
	}
	if cp := u.GetIdealGasHeatCapacity(); cp != nil {
		cf := fieldPath(f, "ideal_gas_heat_capacity")
		coef := cp.GetCoefficients()
		d.Cp = &component.IdealGasCp{Tmin: cp.GetMinimumTemperatureK(), Tmax: cp.GetMaximumTemperatureK()}
		if len(coef) == 0 || len(coef) > len(d.Cp.A) {
			v.add(fieldPath(cf, "coefficients"), "must have 1 to %d entries, got %d", len(d.Cp.A), len(coef))
		}
		for i, a := range coef {
			if i < len(d.Cp.A) && checkFinite(v, index(fieldPath(cf, "coefficients"), i), a) {
				d.Cp.A[i] = a
			}
		}
		checkFinite(v, fieldPath(cf, "minimum_temperature_k"), d.Cp.Tmin)
		checkFinite(v, fieldPath(cf, "maximum_temperature_k"), d.Cp.Tmax)
	}
	if len(v.list) > before {
		return component.Component{}, idf, false
	}
	c, err := component.Define(d)
	if err != nil {
		componentError(v, f, err)
		return component.Component{}, idf, false
	}
	return c, idf, true
}

// pseudoComponent estimates a petroleum pseudo-component with the
// component package's correlations, which also own the accepted ranges.
func pseudoComponent(v *violations, f string, p *fugadv1.PseudoComponent) (component.Component, string, bool) {
	idf := fieldPath(f, "id")
	before := len(v.list)
	sg := p.GetSpecificGravity()
	checkFinite(v, fieldPath(f, "specific_gravity"), sg)
	var (
		c   component.Component
		err error
	)
	switch ch := p.GetCharacterisation().(type) {
	case *fugadv1.PseudoComponent_NormalBoilingPointK:
		if checkFinite(v, fieldPath(f, "normal_boiling_point_k"), ch.NormalBoilingPointK) && len(v.list) == before {
			c, err = component.PseudoFromBoilingPoint(p.GetId(), ch.NormalBoilingPointK, sg)
		}
	case *fugadv1.PseudoComponent_MolarMassKgPerMol:
		if checkFinite(v, fieldPath(f, "molar_mass_kg_per_mol"), ch.MolarMassKgPerMol) && len(v.list) == before {
			c, err = component.PseudoFromMolarMass(p.GetId(), ch.MolarMassKgPerMol, sg)
		}
	default:
		v.add(fieldPath(f, "characterisation"), "required: one of normal_boiling_point_k, molar_mass_kg_per_mol")
	}
	if err != nil {
		componentError(v, f, err)
	}
	return c, idf, len(v.list) == before
}

// componentFields maps component.InputError field names onto the wire
// names of UserComponent and PseudoComponent.
var componentFields = map[string]string{
	"ID":        "id",
	"MolarMass": "molar_mass_kg_per_mol",
	"Tc":        "critical_temperature_k",
	"Pc":        "critical_pressure_pa",
	"Omega":     "acentric_factor",
	"Vc":        "critical_volume_m3_per_mol",
	"ZRA":       "rackett_compressibility",
	"Tb":        "normal_boiling_point_k",
	"SG":        "specific_gravity",
	"Hf":        "enthalpy_of_formation_j_per_mol",
	"Family":    "id",
	"Cp":        "ideal_gas_heat_capacity",
	"Cp.A":      "ideal_gas_heat_capacity.coefficients",
	"Cp.Tmin":   "ideal_gas_heat_capacity.minimum_temperature_k",
	"Cp.Tmax":   "ideal_gas_heat_capacity.maximum_temperature_k",
}

// componentError records an error of the component package against the
// field it names under prefix f.
func componentError(v *violations, f string, err error) {
	var ie *component.InputError
	if !errors.As(err, &ie) {
		v.add(f, "%v", err)
		return
	}
	name, ok := componentFields[ie.Field]
	if !ok && strings.HasPrefix(ie.Field, "Cp.A[") {
		name, ok = "ideal_gas_heat_capacity.coefficients"+strings.TrimPrefix(ie.Field, "Cp.A"), true
	}
	if !ok {
		name = ""
	}
	if ie.Field == "ID" || ie.Field == "Family" || ie.Field == "Cp" {
		v.add(fieldPath(f, name), "%s", ie.Reason)
		return
	}
	v.add(fieldPath(f, name), "%s (got %g)", ie.Reason, ie.Value)
}

// compileFluid builds the mixture of a validated fluid. Errors from the
// equation of state at this point are input errors the field checks did
// not foresee; they are reported against the fluid.
func (s *Server) compileFluid(prefix string, model eos.Model, comps []component.Component, opts eos.Options) (*compiledFluid, error) {
	mx, err := eos.NewMixture(model, comps, opts)
	if err != nil {
		var v violations
		var ie *eos.InputError
		if errors.As(err, &ie) {
			v.add(fieldPath(prefix, eosFieldPath(ie.Field)), "%s (value %g)", ie.Reason, ie.Value)
		} else {
			v.add(prefix, "%v", err)
		}
		return nil, v.err()
	}
	cf := &compiledFluid{mixture: mx, ids: make([]string, len(comps))}
	for i := range comps {
		cf.ids[i] = comps[i].ID
	}
	return cf, nil
}

// eosFieldPath maps an eos.InputError field ("components[2].Tc",
// "kij[0].k0") onto the wire's field names.
func eosFieldPath(f string) string {
	r := strings.NewReplacer(
		".Tc", ".critical_temperature_k",
		".Pc", ".critical_pressure_pa",
		".Omega", ".acentric_factor",
		".MolarMass", ".molar_mass_kg_per_mol",
		"kij[", "interaction_parameters[",
		".k1", ".k1_per_k",
	)
	return r.Replace(f)
}

// compiled compiles a fluid that checkFluid accepted, through the
// compiled-fluid cache when one is configured. It returns a status error.
func (s *Server) compiled(prefix string, fc fluidCheck) (*compiledFluid, error) {
	if fc.cf != nil {
		return fc.cf, nil
	}
	if fc.comps == nil {
		return nil, errInternal(fmt.Sprintf("%s passed validation without components", prefix))
	}
	build := func() (*compiledFluid, error) {
		cf, err := s.compileFluid(prefix, fc.model, fc.comps, fc.opts)
		if err == nil {
			cf.def = fc.def
		}
		return cf, err
	}
	if s.fluids != nil && fc.def != nil {
		return s.fluids.compiled(fc.def, build)
	}
	return build()
}
