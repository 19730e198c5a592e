package main

import (
	"context"
	"flag"
	"fmt"
	"strings"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

var modelsCommand = &command{
	name:    "models",
	summary: "equations of state the server offers, with their constants (ListModels)",
	usage: `Usage: fugactl models

Lists each model with its universal critical compressibility Zc and the
constants Ωa, Ωb, and its literature reference.
`,
	flags: func(a *app, fs *flag.FlagSet) func([]string) error {
		return func(args []string) error {
			if err := noArgs(args); err != nil {
				return err
			}
			resp, err := unary(a, func(ctx context.Context, c fugadv1.FugadServiceClient) (*fugadv1.ListModelsResponse, error) {
				return c.ListModels(ctx, &fugadv1.ListModelsRequest{})
			})
			if err != nil {
				return err
			}
			if a.g.json {
				return a.printJSON(resp)
			}
			w := a.stdout
			fmt.Fprintf(w, "Models (version %s)\n\n", resp.GetModelVersion())
			tw := table(w)
			row(tw, "model", "description", "Zc", "Ωa", "Ωb")
			for _, m := range resp.GetModels() {
				row(tw, m.GetName(), m.GetDescription(), fixed(m.GetCriticalCompressibility(), 6), fixed(m.GetOmegaA(), 6), fixed(m.GetOmegaB(), 6))
			}
			tw.Flush()
			fmt.Fprintln(w, "\nReferences:")
			for _, m := range resp.GetModels() {
				fmt.Fprintf(w, "  %s: %s\n", m.GetName(), m.GetReference())
			}
			a.caution()
			return nil
		}
	},
}

var componentsCommand = &command{
	name:    "components",
	summary: "list or search the component data bank (ListComponents)",
	usage: `Usage: fugactl components [SEARCH] [--long]

Lists the components of the server's data bank; SEARCH (or --search) keeps
those whose id, name, formula, CAS number or alias contains it
(case-insensitive). The ids are what --fluid takes. A * marks rows with values
recalled from memory of the cited source (treat them as unverified). --long
(or a search with one match) prints every constant and the source.

Examples:
  fugactl components butane
  fugactl components 124-18-5 --long
`,
	flags: func(a *app, fs *flag.FlagSet) func([]string) error {
		var search string
		var long bool
		fs.StringVar(&search, "search", "", "case-insensitive substring of id, name, formula, CAS number or alias")
		fs.BoolVar(&long, "long", false, "print all constants and the source of each component")
		return func(args []string) error {
			if len(args) > 0 {
				if search != "" || len(args) > 1 {
					return usagef("give one search term")
				}
				search = args[0]
				if err := fs.Parse(args[1:]); err != nil {
					return flagParseError{err}
				}
				if err := noArgs(fs.Args()); err != nil {
					return err
				}
			}
			resp, err := unary(a, func(ctx context.Context, c fugadv1.FugadServiceClient) (*fugadv1.ListComponentsResponse, error) {
				return c.ListComponents(ctx, &fugadv1.ListComponentsRequest{Filter: search})
			})
			if err != nil {
				return err
			}
			if a.g.json {
				return a.printJSON(resp)
			}
			a.printComponents(resp, search, long)
			a.caution()
			return nil
		}
	},
}

// familyName is the short name of a component family.
func familyName(f fugadv1.ComponentFamily) string {
	return strings.ToLower(strings.ReplaceAll(strings.TrimPrefix(f.String(), "COMPONENT_FAMILY_"), "_", " "))
}

func (a *app) printComponents(r *fugadv1.ListComponentsResponse, search string, long bool) {
	w := a.stdout
	cs := r.GetComponents()
	what := "all components"
	if search != "" {
		what = fmt.Sprintf("matching %q", search)
	}
	fmt.Fprintf(w, "Components (%s): %d, data %s\n", what, len(cs), r.GetDataVersion())
	if len(cs) == 0 {
		return
	}
	fmt.Fprintln(w)
	if long || len(cs) == 1 {
		for i, c := range cs {
			if i > 0 {
				fmt.Fprintln(w)
			}
			printComponent(a, c)
		}
		return
	}
	tw := table(w)
	row(tw, "id", "name", "formula", "CAS", "family", "M g/mol", "Tc K", "Tc °C", "Pc bar", "ω", "Tb K", "")
	recalled := false
	for _, c := range cs {
		mark := ""
		if c.GetRecalledFromMemory() {
			mark, recalled = "*", true
		}
		tb := "–"
		if c.GetNormalBoilingPointK() > 0 {
			tb = fixed(c.GetNormalBoilingPointK(), 2)
		}
		row(tw, c.GetId(), c.GetName(), c.GetFormula(), c.GetCasNumber(), familyName(c.GetFamily()),
			fixed(1000*c.GetMolarMassKgPerMol(), 3), fixed(c.GetCriticalTemperatureK(), 2), fixed(celsius(c.GetCriticalTemperatureK()), 2),
			fixed(bar(c.GetCriticalPressurePa()), 3), fixed(c.GetAcentricFactor(), 4), tb, mark)
	}
	tw.Flush()
	if recalled {
		fmt.Fprintln(w, "\n* values recalled from memory of the cited source, not read from it: treat as unverified (--long shows the source).")
	}
}

func printComponent(a *app, c *fugadv1.ComponentInfo) {
	w := a.stdout
	tw := table(w)
	kv := func(k, v string) { row(tw, k, v) }
	kv("id", c.GetId())
	kv("name", c.GetName())
	kv("formula", c.GetFormula())
	kv("CAS number", c.GetCasNumber())
	if len(c.GetAliases()) > 0 {
		kv("aliases", strings.Join(c.GetAliases(), ", "))
	}
	kv("family", familyName(c.GetFamily()))
	kv("molar mass", fixed(1000*c.GetMolarMassKgPerMol(), 4)+" g/mol")
	kv("critical temperature", tempText(c.GetCriticalTemperatureK()))
	kv("critical pressure", presText(c.GetCriticalPressurePa()))
	kv("acentric factor", fixed(c.GetAcentricFactor(), 4))
	if v := c.GetCriticalVolumeM3PerMol(); v > 0 {
		kv("critical volume", num(1e6*v, 5)+" cm³/mol")
	}
	if z := c.GetRackettCompressibility(); z > 0 {
		kv("Rackett Z_RA", fixed(z, 4))
	}
	if tb := c.GetNormalBoilingPointK(); tb > 0 {
		kv("normal boiling point", tempText(tb))
	}
	kv("enthalpy of formation", num(c.GetEnthalpyOfFormationJPerMol()/1000, 6)+" kJ/mol (ideal gas, 298.15 K)")
	if cp := c.GetIdealGasHeatCapacity(); cp != nil {
		var terms []string
		for k, a := range cp.GetCoefficients() {
			terms = append(terms, fmt.Sprintf("a%d=%g", k, a))
		}
		kv("ideal-gas Cp°/R", strings.Join(terms, " ")+fmt.Sprintf(" (fitted %g–%g K)", cp.GetMinimumTemperatureK(), cp.GetMaximumTemperatureK()))
	}
	src := c.GetSource()
	if c.GetRecalledFromMemory() {
		src += " [values recalled from memory of this source: unverified]"
	}
	kv("source", src)
	tw.Flush()
}
