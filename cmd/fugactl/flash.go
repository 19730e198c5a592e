package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"math"
	"strings"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

var flashCommand = &command{
	name:    "flash",
	summary: "equilibrium state of a feed at two specified variables (Flash)",
	usage: `Usage: fugactl flash --model M --fluid "..." VAR VAR

Give exactly two specification variables:
  -T and -P        temperature and pressure
  -P and -H        pressure and molar enthalpy (isenthalpic, e.g. across a valve)
  -P and -S        pressure and molar entropy (isentropic, e.g. an expander)
  -T and -V        temperature and overall molar volume (closed vessel)
  -U and -V        molar internal energy and volume (closed adiabatic vessel)
  -P and --beta    pressure and vapour fraction (0 bubble, 1 dew temperature)
  -T and --beta    temperature and vapour fraction (0 bubble, 1 dew pressure)
Enthalpy, entropy and internal energy are on the server's reference state
(ideal gas at 298.15 K and 101 325 Pa, H = enthalpy of formation).

The table shows each phase (label, amount β, mass and molar density, Z,
molar mass, H, S, Cp), the compositions in mol %, K-values and the solver
report on one line.

Examples (fictional Kestrel Ridge plant):
  # inlet separator at 40 °C and 70 bar
  fugactl flash --model PR78 -T 40C -P 70bar \
    --fluid "nitrogen=1.2, carbon-dioxide=1.8, methane=87, ethane=5.2, propane=2.4, isobutane=0.7, n-butane=0.8, n-pentane=0.5, n-hexane=0.4"
  # after the inlet choke, 25 barg at the separator inlet enthalpy
  fugactl flash --model PR78 --fluid "$KR_FEED" -P 25barg -H -79.2kJ/mol
  # bubble-point temperature of the stabiliser bottoms at 8 bar
  fugactl flash --model PR78 --fluid "$KR_BOTTOMS" -P 8bar --beta 0
`,
	flags: func(a *app, fs *flag.FlagSet) func([]string) error {
		var ff fluidFlags
		var sf stateFlags
		var so solverFlags
		ff.register(fs)
		sf.register(fs, keyT, keyP, keyH, keyS, keyV, keyU, keyBeta)
		so.register(fs)
		return func(args []string) error {
			if err := noArgs(args); err != nil {
				return err
			}
			fd, err := buildFeed(&ff, fs)
			if err != nil {
				return err
			}
			st, _, err := buildState(sf.fields(), fd.comp.fractions)
			if err != nil {
				return usageError{err}
			}
			req := &fugadv1.FlashRequest{Fluid: fd.fluid, State: st, Options: so.options(), BypassCache: a.g.noCache}
			resp, err := unary(a, func(ctx context.Context, c fugadv1.FugadServiceClient) (*fugadv1.FlashResponse, error) {
				return c.Flash(ctx, req)
			})
			if err != nil {
				return err
			}
			if a.g.json {
				return a.printJSON(resp)
			}
			a.printFeedNote(fd)
			fmt.Fprintf(a.stdout, "Flash, %s\n", specText(st))
			a.printFlash(fd, resp.GetResult())
			a.caution()
			return nil
		}
	},
}

// printFeedNote states how the --fluid amounts were read.
func (a *app) printFeedNote(fd *feed) {
	fmt.Fprintf(a.stdout, "Fluid %s\n", fd.describe(6))
	basis := "mol %"
	if fd.comp.basis == basisFraction {
		basis = "mole fractions"
	}
	note := "amounts read as " + basis
	if fd.comp.note != "" {
		note += "; " + fd.comp.note
	}
	fmt.Fprintf(a.stdout, "(%s)\n", note)
}

// phaseLabels names the phases of a result for column headers, numbering
// repeated labels (liquid 1, liquid 2).
func phaseLabels(ph []*fugadv1.Phase) []string {
	count := map[string]int{}
	for _, p := range ph {
		count[phaseName(p.GetLabel())]++
	}
	seen := map[string]int{}
	out := make([]string, len(ph))
	for i, p := range ph {
		n := phaseName(p.GetLabel())
		seen[n]++
		if count[n] > 1 {
			n = fmt.Sprintf("%s %d", n, seen[n])
		}
		out[i] = n
	}
	return out
}

// optional formats an optional property, "–" when absent.
func optional(v *float64, sig int) string {
	if v == nil {
		return "–"
	}
	return num(*v, sig)
}

// printFlash prints a flash result: conditions, the phase table, the
// composition table and the solver report.
func (a *app) printFlash(fd *feed, r *fugadv1.FlashResult) {
	w := a.stdout
	ph := r.GetPhases()
	fmt.Fprintf(w, "Equilibrium: T %s   P %s   %d phase(s), vapour fraction β %s\n\n",
		tempText(r.GetTemperatureK()), presText(r.GetPressurePa()), len(ph), fixed(r.GetVapourFraction(), 5))
	tw := table(w)
	row(tw, "phase", "β", "T °C", "P bar", "ρ kg/m³", "ρ mol/m³", "Z", "M g/mol", "H J/mol", "S J/(mol·K)", "Cp J/(mol·K)")
	labels := phaseLabels(ph)
	line := func(name string, amount float64, p *fugadv1.Properties) {
		row(tw, name, fixed(amount, 5), fixed(celsius(r.GetTemperatureK()), 2), num(bar(r.GetPressurePa()), 6),
			num(p.GetMassDensityKgPerM3(), 5), num(p.GetMolarDensityMolPerM3(), 5), fixed(p.GetCompressibilityFactor(), 5),
			num(1000*p.GetMolarMassKgPerMol(), 5), num(p.GetMolarEnthalpyJPerMol(), 6), num(p.GetMolarEntropyJPerMolK(), 5),
			optional(p.MolarIsobaricHeatCapacityJPerMolK, 5))
	}
	for i, p := range ph {
		line(labels[i], p.GetAmount(), p.GetProperties())
	}
	if len(ph) > 1 && r.GetOverall() != nil {
		line("overall", 1, r.GetOverall())
	}
	tw.Flush()
	fmt.Fprintln(w)
	tw = table(w)
	head := []string{"component", "feed mol %"}
	for _, l := range labels {
		head = append(head, l+" mol %")
	}
	k := r.GetKValues()
	if len(k) > 0 {
		head = append(head, "K")
	}
	row(tw, head...)
	for i, n := range fd.comp.names {
		cells := []string{n, fixed(100*at(fd.comp.fractions, i), 4)}
		for _, p := range ph {
			cells = append(cells, fixed(100*at(p.GetMoleFractions(), i), 4))
		}
		if len(k) > 0 {
			cells = append(cells, num(at(k, i), 5))
		}
		row(tw, cells...)
	}
	tw.Flush()
	fmt.Fprintln(w)
	fmt.Fprintln(w, reportLine(r.GetReport()))
}

// at returns v[i], or NaN when v is too short (a malformed response shows
// as NaN rather than a panic).
func at(v []float64, i int) float64 {
	if i < len(v) {
		return v[i]
	}
	return math.NaN()
}

// phaseSummary is the short form of a result's phases, e.g. "vapour+liquid".
func phaseSummary(r *fugadv1.FlashResult) string {
	if r == nil {
		return ""
	}
	return strings.Join(phaseLabels(r.GetPhases()), "+")
}

// writeSummaryHeader and writeSummaryRow print one line per flash result,
// for batches and streams.
func writeSummaryHeader(w io.Writer) {
	row(w, "#", "specification", "T °C", "P bar", "β", "phases", "ρ(1st phase) kg/m³", "status")
}

func writeSummaryRow(w io.Writer, id string, st *fugadv1.FlashState, r *fugadv1.FlashResult, statusCell string) {
	if r == nil {
		row(w, id, shortSpec(st), "", "", "", "", "", statusCell)
		return
	}
	rho := ""
	if ph := r.GetPhases(); len(ph) > 0 {
		rho = num(ph[0].GetProperties().GetMassDensityKgPerM3(), 5)
	}
	row(w, id, shortSpec(st), fixed(celsius(r.GetTemperatureK()), 2), num(bar(r.GetPressurePa()), 6),
		fixed(r.GetVapourFraction(), 5), phaseSummary(r), rho, statusCell)
}

// shortSpec is a compact specification for summary rows.
func shortSpec(st *fugadv1.FlashState) string {
	if st == nil {
		return ""
	}
	switch s := st.GetSpecification().(type) {
	case *fugadv1.FlashState_Tp:
		return fmt.Sprintf("T %s°C P %s bar", fixed(celsius(s.Tp.GetTemperatureK()), 2), num(bar(s.Tp.GetPressurePa()), 5))
	case *fugadv1.FlashState_Ph:
		return fmt.Sprintf("P %s bar H %s J/mol", num(bar(s.Ph.GetPressurePa()), 5), num(s.Ph.GetMolarEnthalpyJPerMol(), 6))
	case *fugadv1.FlashState_Ps:
		return fmt.Sprintf("P %s bar S %s J/(mol·K)", num(bar(s.Ps.GetPressurePa()), 5), num(s.Ps.GetMolarEntropyJPerMolK(), 5))
	case *fugadv1.FlashState_Tv:
		return fmt.Sprintf("T %s°C V %s m³/mol", fixed(celsius(s.Tv.GetTemperatureK()), 2), num(s.Tv.GetMolarVolumeM3PerMol(), 5))
	case *fugadv1.FlashState_Uv:
		return fmt.Sprintf("U %s J/mol V %s m³/mol", num(s.Uv.GetMolarInternalEnergyJPerMol(), 6), num(s.Uv.GetMolarVolumeM3PerMol(), 5))
	case *fugadv1.FlashState_PVapourFraction:
		return fmt.Sprintf("P %s bar β %s", num(bar(s.PVapourFraction.GetPressurePa()), 5), num(s.PVapourFraction.GetVapourFraction(), 4))
	case *fugadv1.FlashState_TVapourFraction:
		return fmt.Sprintf("T %s°C β %s", fixed(celsius(s.TVapourFraction.GetTemperatureK()), 2), num(s.TVapourFraction.GetVapourFraction(), 4))
	}
	return "?"
}
