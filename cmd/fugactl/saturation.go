package main

import (
	"context"
	"flag"
	"fmt"
	"strings"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

var saturationCommand = &command{
	name:    "saturation",
	summary: "bubble or dew point: pressure at a temperature, or temperature at a pressure (SaturationPoint)",
	usage: `Usage: fugactl saturation bubble|dew --model M --fluid "..." (-T TEMP | -P PRES)

Give -T to solve for the saturation pressure at that temperature, or -P to
solve for the saturation temperature at that pressure. The kind may also be
given as --type bubble|dew. Prints the saturation point, the composition of
the incipient phase, the K-values and the solver report.

Examples (fictional Kestrel Ridge plant):
  # hydrocarbon dew point of the sales gas at the export pressure
  fugactl saturation dew --model PR78 --fluid "$KR_SALES" -P 55bar
  # bubble-point pressure of the stabilised condensate in the storage tank
  fugactl saturation bubble --model PR78 --fluid "$KR_CONDENSATE" -T 35C
`,
	flags: func(a *app, fs *flag.FlagSet) func([]string) error {
		var ff fluidFlags
		var so solverFlags
		var sf stateFlags
		var kind string
		ff.register(fs)
		so.register(fs)
		sf.register(fs, keyT, keyP)
		fs.StringVar(&kind, "type", "", "bubble or dew (or give it as the first argument)")
		var branch string
		fs.StringVar(&branch, "branch", "", "lower or upper: which of two points (e.g. the upper dew pressure of a gas condensate in its retrograde range); default: the solver's choice")
		return func(args []string) error {
			if len(args) > 0 {
				if kind != "" {
					return usagef("the kind is given twice (%q and --type %q)", args[0], kind)
				}
				kind, args = args[0], args[1:]
				// Flags may follow the kind: parse them now.
				if err := fs.Parse(args); err != nil {
					return flagParseError{err}
				}
				args = fs.Args()
			}
			if err := noArgs(args); err != nil {
				return err
			}
			var typ fugadv1.SaturationType
			switch strings.ToLower(kind) {
			case "bubble":
				typ = fugadv1.SaturationType_SATURATION_TYPE_BUBBLE
			case "dew":
				typ = fugadv1.SaturationType_SATURATION_TYPE_DEW
			case "":
				return usagef("say bubble or dew, e.g. fugactl saturation dew -P 55bar ...")
			default:
				return usagef("kind %q: want bubble or dew", kind)
			}
			fd, err := buildFeed(&ff, fs)
			if err != nil {
				return err
			}
			req := &fugadv1.SaturationPointRequest{Fluid: fd.fluid, MoleFractions: fd.comp.fractions, Type: typ, Options: so.options(), BypassCache: a.g.noCache}
			switch strings.ToLower(branch) {
			case "":
			case "lower":
				req.Branch = fugadv1.SaturationBranch_SATURATION_BRANCH_LOWER
			case "upper":
				req.Branch = fugadv1.SaturationBranch_SATURATION_BRANCH_UPPER
			default:
				return usagef("--branch %q: want lower or upper", branch)
			}
			f := sf.fields()
			switch {
			case f[keyT] != "" && f[keyP] != "":
				return usagef("give -T (solve for P) or -P (solve for T), not both")
			case f[keyT] != "":
				t, err := parseQuantity(temperatureQ, f[keyT])
				if err != nil {
					return usagef("-T: %w", err)
				}
				req.Specified = &fugadv1.SaturationPointRequest_TemperatureK{TemperatureK: t}
			case f[keyP] != "":
				p, err := parseQuantity(pressureQ, f[keyP])
				if err != nil {
					return usagef("-P: %w", err)
				}
				req.Specified = &fugadv1.SaturationPointRequest_PressurePa{PressurePa: p}
			default:
				return usagef("give -T (solve for the pressure) or -P (solve for the temperature)")
			}
			resp, err := unary(a, func(ctx context.Context, c fugadv1.FugadServiceClient) (*fugadv1.SaturationPointResponse, error) {
				return c.SaturationPoint(ctx, req)
			})
			if err != nil {
				return err
			}
			if a.g.json {
				return a.printJSON(resp)
			}
			a.printFeedNote(fd)
			a.printSaturation(fd, req, resp)
			a.caution()
			return nil
		}
	},
}

func (a *app) printSaturation(fd *feed, req *fugadv1.SaturationPointRequest, r *fugadv1.SaturationPointResponse) {
	w := a.stdout
	kind := "Bubble"
	if req.GetType() == fugadv1.SaturationType_SATURATION_TYPE_DEW {
		kind = "Dew"
	}
	if _, atT := req.GetSpecified().(*fugadv1.SaturationPointRequest_TemperatureK); atT {
		fmt.Fprintf(w, "%s point at T %s:  P %s\n", kind, tempText(r.GetTemperatureK()), presText(r.GetPressurePa()))
	} else {
		fmt.Fprintf(w, "%s point at P %s:  T %s\n", kind, presText(r.GetPressurePa()), tempText(r.GetTemperatureK()))
	}
	inc := phaseName(r.GetIncipientPhase())
	fmt.Fprintf(w, "incipient phase: %s\n\n", inc)
	tw := table(w)
	row(tw, "component", "feed mol %", "incipient "+inc+" mol %", "K")
	for i, n := range fd.comp.names {
		row(tw, n, fixed(100*fd.comp.fractions[i], 4), fixed(100*at(r.GetIncipientMoleFractions(), i), 4), num(at(r.GetKValues(), i), 5))
	}
	tw.Flush()
	fmt.Fprintln(w)
	fmt.Fprintln(w, reportLine(r.GetReport()))
}
