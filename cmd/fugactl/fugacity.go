package main

import (
	"context"
	"flag"
	"fmt"
	"math"
	"strings"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

var fugacityCommand = &command{
	name:    "fugacity",
	summary: "ln φ of one phase of given composition, optionally with derivatives (FugacityCoefficients)",
	usage: `Usage: fugactl fugacity --model M --fluid "..." -T TEMP -P PRES [--root vapour|liquid|stable] [--derivatives T,P,n|all]

Evaluates the fugacity coefficients φ_i of one phase whose composition is the
--fluid composition, on the chosen root of the cubic (stable: the root of
lowest Gibbs energy). This is a single-phase evaluation: it does not test
phase stability (use flash for that).

--derivatives adds analytic derivatives: T gives ∂ln φ_i/∂T (1/K), P gives
∂ln φ_i/∂P (shown per MPa), n gives the matrix ∂ln φ_i/∂n_j for one mole of
phase (1/mol); "all" gives the three.

Example (fictional Kestrel Ridge separator vapour):
  fugactl fugacity --model PR78 -T 40C -P 70bar --root vapour --derivatives all \
    --fluid "methane=91.2, ethane=5.1, propane=2.1, n-butane=0.9, carbon-dioxide=0.7"
`,
	flags: func(a *app, fs *flag.FlagSet) func([]string) error {
		var ff fluidFlags
		var sf stateFlags
		var root, deriv string
		ff.register(fs)
		sf.register(fs, keyT, keyP)
		fs.StringVar(&root, "root", "stable", "root of the cubic: vapour, liquid, or stable (lowest Gibbs energy)")
		fs.StringVar(&deriv, "derivatives", "", "derivatives to return: any of T, P, n (comma-separated), or all")
		return func(args []string) error {
			if err := noArgs(args); err != nil {
				return err
			}
			fd, err := buildFeed(&ff, fs)
			if err != nil {
				return err
			}
			f := sf.fields()
			if f[keyT] == "" || f[keyP] == "" {
				return usagef("-T and -P are both required")
			}
			t, err := parseQuantity(temperatureQ, f[keyT])
			if err != nil {
				return usagef("-T: %w", err)
			}
			p, err := parseQuantity(pressureQ, f[keyP])
			if err != nil {
				return usagef("-P: %w", err)
			}
			req := &fugadv1.FugacityCoefficientsRequest{Fluid: fd.fluid, TemperatureK: t, PressurePa: p, MoleFractions: fd.comp.fractions, BypassCache: a.g.noCache}
			switch strings.ToLower(root) {
			case "vapour", "vapor", "v":
				req.Root = fugadv1.RootChoice_ROOT_CHOICE_VAPOUR
			case "liquid", "l":
				req.Root = fugadv1.RootChoice_ROOT_CHOICE_LIQUID
			case "stable", "gibbs", "min-gibbs":
				req.Root = fugadv1.RootChoice_ROOT_CHOICE_MINIMUM_GIBBS
			default:
				return usagef("--root %q: want vapour, liquid or stable", root)
			}
			if deriv != "" {
				for _, d := range strings.FieldsFunc(deriv, func(r rune) bool { return r == ',' || r == ' ' || r == '+' }) {
					switch strings.ToLower(d) {
					case "t":
						req.TemperatureDerivatives = true
					case "p":
						req.PressureDerivatives = true
					case "n", "x", "composition":
						req.CompositionDerivatives = true
					case "all":
						req.TemperatureDerivatives, req.PressureDerivatives, req.CompositionDerivatives = true, true, true
					default:
						return usagef("--derivatives: unknown %q: want T, P, n or all", d)
					}
				}
			}
			resp, err := unary(a, func(ctx context.Context, c fugadv1.FugadServiceClient) (*fugadv1.FugacityCoefficientsResponse, error) {
				return c.FugacityCoefficients(ctx, req)
			})
			if err != nil {
				return err
			}
			if a.g.json {
				return a.printJSON(resp)
			}
			a.printFeedNote(fd)
			a.printFugacity(fd, req, resp)
			a.caution()
			return nil
		}
	},
}

var rootNames = map[fugadv1.RootFound]string{
	fugadv1.RootFound_ROOT_FOUND_SINGLE: "the single real root",
	fugadv1.RootFound_ROOT_FOUND_VAPOUR: "the vapour-like (largest) of three roots",
	fugadv1.RootFound_ROOT_FOUND_LIQUID: "the liquid-like (smallest) of three roots",
}

func (a *app) printFugacity(fd *feed, req *fugadv1.FugacityCoefficientsRequest, r *fugadv1.FugacityCoefficientsResponse) {
	w := a.stdout
	fmt.Fprintf(w, "Fugacity coefficients at T %s, P %s\n", tempText(req.GetTemperatureK()), presText(req.GetPressurePa()))
	rn := rootNames[r.GetRoot()]
	if rn == "" {
		rn = r.GetRoot().String()
	}
	fmt.Fprintf(w, "root: %s (%d real root(s)); Z %s; molar volume %s m³/mol\n\n", rn, r.GetRealRootCount(), fixed(r.GetCompressibilityFactor(), 6), num(r.GetMolarVolumeM3PerMol(), 6))
	tw := table(w)
	head := []string{"component", "x mol %", "ln φ", "φ", "fugacity bar"}
	dT, dP := r.GetDLnPhiDTemperaturePerK(), r.GetDLnPhiDPressurePerPa()
	if len(dT) > 0 {
		head = append(head, "∂lnφ/∂T 1/K")
	}
	if len(dP) > 0 {
		head = append(head, "∂lnφ/∂P 1/MPa")
	}
	row(tw, head...)
	lnphi := r.GetLnFugacityCoefficients()
	for i, n := range fd.comp.names {
		x := fd.comp.fractions[i]
		l := at(lnphi, i)
		cells := []string{n, fixed(100*x, 4), fixed(l, 6), num(math.Exp(l), 6), num(bar(x*math.Exp(l)*req.GetPressurePa()), 6)}
		if len(dT) > 0 {
			cells = append(cells, num(at(dT, i), 5))
		}
		if len(dP) > 0 {
			cells = append(cells, num(1e6*at(dP, i), 5))
		}
		row(tw, cells...)
	}
	tw.Flush()
	if dn := r.GetDLnPhiDMolesPerMol(); len(dn) > 0 {
		n := len(fd.comp.names)
		fmt.Fprintln(w, "\n∂ln φ_i/∂n_j, 1/mol, for one mole of phase (row i, column j):")
		tw = table(w)
		row(tw, append([]string{""}, fd.comp.names...)...)
		for i := range n {
			cells := []string{fd.comp.names[i]}
			for j := range n {
				cells = append(cells, num(at(dn, i*n+j), 5))
			}
			row(tw, cells...)
		}
		tw.Flush()
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, reportLine(r.GetReport()))
}
