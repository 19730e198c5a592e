package server

import (
	"context"
	"strings"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
)

// modelReferences are the literature references of the models.
var modelReferences = map[eos.Model]string{
	eos.PR76: "D.-Y. Peng, D. B. Robinson, A new two-constant equation of state, Ind. Eng. Chem. Fundam. 15(1):59–64 (1976)",
	eos.PR78: "D. B. Robinson, D.-Y. Peng, The characterization of the heptanes and heavier fractions for the GPA Peng–Robinson programs, GPA Research Report RR-28 (1978)",
	eos.SRK:  "G. Soave, Equilibrium constants from a modified Redlich–Kwong equation of state, Chem. Eng. Sci. 27(6):1197–1203 (1972)",
}

// wireModel maps an eos model to the wire enum.
func wireModel(m eos.Model) fugadv1.Model {
	switch m {
	case eos.PR76:
		return fugadv1.Model_MODEL_PR76
	case eos.PR78:
		return fugadv1.Model_MODEL_PR78
	case eos.SRK:
		return fugadv1.Model_MODEL_SRK
	}
	return fugadv1.Model_MODEL_UNSPECIFIED
}

// ListModels lists the equations of state of the eos package with their
// exact constants.
func (s *Server) ListModels(ctx context.Context, _ *fugadv1.ListModelsRequest) (*fugadv1.ListModelsResponse, error) {
	resp := &fugadv1.ListModelsResponse{ModelVersion: s.cfg.ModelVersion}
	for _, m := range eos.Models() {
		resp.Models = append(resp.Models, &fugadv1.ModelInfo{
			Model:                   wireModel(m),
			Name:                    m.String(),
			Description:             m.Description(),
			Reference:               modelReferences[m],
			CriticalCompressibility: m.CriticalCompressibility(),
			OmegaA:                  m.OmegaA(),
			OmegaB:                  m.OmegaB(),
		})
	}
	return resp, nil
}

// wireFamily maps a component family to the wire enum.
var wireFamily = map[component.Family]fugadv1.ComponentFamily{
	component.FamilyOther:     fugadv1.ComponentFamily_COMPONENT_FAMILY_OTHER,
	component.FamilyParaffin:  fugadv1.ComponentFamily_COMPONENT_FAMILY_PARAFFIN,
	component.FamilyNaphthene: fugadv1.ComponentFamily_COMPONENT_FAMILY_NAPHTHENE,
	component.FamilyAromatic:  fugadv1.ComponentFamily_COMPONENT_FAMILY_AROMATIC,
	component.FamilyOlefin:    fugadv1.ComponentFamily_COMPONENT_FAMILY_OLEFIN,
	component.FamilyInert:     fugadv1.ComponentFamily_COMPONENT_FAMILY_INERT,
	component.FamilyAcidGas:   fugadv1.ComponentFamily_COMPONENT_FAMILY_ACID_GAS,
	component.FamilyWater:     fugadv1.ComponentFamily_COMPONENT_FAMILY_WATER,
	component.FamilyAlcohol:   fugadv1.ComponentFamily_COMPONENT_FAMILY_ALCOHOL,
	component.FamilyGlycol:    fugadv1.ComponentFamily_COMPONENT_FAMILY_GLYCOL,
	component.FamilyPseudo:    fugadv1.ComponentFamily_COMPONENT_FAMILY_PSEUDO,
}

// componentMatches reports whether the library component c matches the
// lower-case filter f.
func componentMatches(c *component.Component, f string) bool {
	if f == "" {
		return true
	}
	for _, s := range append([]string{c.ID, c.Name, c.Formula, c.CAS}, c.Aliases...) {
		if strings.Contains(strings.ToLower(s), f) {
			return true
		}
	}
	return false
}

// ListComponents lists the library components matching the filter, sorted
// by id, with their constants and sources.
func (s *Server) ListComponents(ctx context.Context, req *fugadv1.ListComponentsRequest) (*fugadv1.ListComponentsResponse, error) {
	var v violations
	filter := req.GetFilter()
	if len([]rune(filter)) > maxFilterLength {
		v.add("filter", "must be at most %d characters, got %d", maxFilterLength, len([]rune(filter)))
	}
	if err := v.err(); err != nil {
		return nil, err
	}
	f := strings.ToLower(strings.TrimSpace(filter))
	resp := &fugadv1.ListComponentsResponse{DataVersion: s.cfg.DataVersion}
	for _, c := range component.All() {
		if !componentMatches(&c, f) {
			continue
		}
		src := c.Source
		if c.CpSource != "" && c.CpSource != c.Source {
			src += "; ideal-gas Cp: " + c.CpSource
		}
		resp.Components = append(resp.Components, &fugadv1.ComponentInfo{
			Id:                         c.ID,
			Name:                       c.Name,
			Formula:                    c.Formula,
			CasNumber:                  c.CAS,
			Aliases:                    c.Aliases,
			Family:                     wireFamily[c.Family],
			MolarMassKgPerMol:          c.MolarMass,
			CriticalTemperatureK:       c.Tc,
			CriticalPressurePa:         c.Pc,
			AcentricFactor:             c.Omega,
			CriticalVolumeM3PerMol:     c.Vc,
			RackettCompressibility:     c.ZRA,
			NormalBoilingPointK:        c.Tb,
			IdealGasHeatCapacity:       &fugadv1.IdealGasHeatCapacity{Coefficients: c.Cp.A[:], MinimumTemperatureK: c.Cp.Tmin, MaximumTemperatureK: c.Cp.Tmax},
			EnthalpyOfFormationJPerMol: c.Hf,
			Source:                     src,
			RecalledFromMemory:         c.Recalled,
		})
	}
	return resp, nil
}
