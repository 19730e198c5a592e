package main

import (
	"context"
	"flag"
	"fmt"
	"os"
	"strings"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// repeated is a flag that may be given several times.
type repeated []string

func (r *repeated) String() string     { return strings.Join(*r, "; ") }
func (r *repeated) Set(v string) error { *r = append(*r, v); return nil }

var envelopeCommand = &command{
	name:    "envelope",
	summary: "bubble and dew curves, critical point, cricondenbar, cricondentherm; SVG/PNG plot (PhaseEnvelope)",
	usage: `Usage: fugactl envelope --model M --fluid "..." [--plot PREFIX | --svg F --png F] [--point T,P[,LABEL]]...

Traces the two-phase boundary from the dew point at --start-pressure, over
the cricondentherm and critical point(s), to the bubble point at the start
pressure. Prints the critical point(s), cricondenbar and cricondentherm and the
solver report; --list prints every point.

Plots (gonum.org/v1/plot): --plot PREFIX writes PREFIX.svg and PREFIX.png;
--svg and --png write one each. The dew branch is solid blue, the bubble
branch dashed red; the critical point, cricondenbar and cricondentherm are
marked and labelled, each --point (repeatable) is drawn as a green cross.
Axes are in °C and bar, or in K and MPa with --si. The title names the model
and the largest components.

Example (fictional Kestrel Ridge sales gas, with the inlet separator and the
export compressor discharge marked):
  fugactl envelope --model PR78 --fluid "$KR_SALES" --plot kr-sales \
    --point "40C,70bar,inlet separator" --point "48C,95bar,export"
`,
	flags: func(a *app, fs *flag.FlagSet) func([]string) error {
		var ff fluidFlags
		var so solverFlags
		var start, top, svg, png, prefix string
		var maxPoints uint
		var points repeated
		var si, list bool
		ff.register(fs)
		so.register(fs)
		fs.StringVar(&start, "start-pressure", "", "pressure where the trace starts and ends, with unit (server default 1 bar)")
		fs.StringVar(&top, "max-pressure", "", "pressure above which tracing stops, with unit (server default 1000 bar)")
		fs.UintVar(&maxPoints, "max-points", 0, "cap on the points returned (0: server limit, default 2000)")
		fs.StringVar(&svg, "svg", "", "write the plot as SVG to this file")
		fs.StringVar(&png, "png", "", "write the plot as PNG to this file")
		fs.StringVar(&prefix, "plot", "", "write PREFIX.svg and PREFIX.png")
		fs.Var(&points, "point", "operating point T,P[,LABEL] to draw, e.g. \"40C,70bar,inlet separator\" (repeatable)")
		fs.BoolVar(&si, "si", false, "plot axes in K and MPa instead of °C and bar")
		fs.BoolVar(&list, "list", false, "print every envelope point")
		return func(args []string) error {
			if err := noArgs(args); err != nil {
				return err
			}
			fd, err := buildFeed(&ff, fs)
			if err != nil {
				return err
			}
			req := &fugadv1.PhaseEnvelopeRequest{Fluid: fd.fluid, MoleFractions: fd.comp.fractions, MaxPoints: uint32(maxPoints), Options: so.options(), BypassCache: a.g.noCache}
			if start != "" {
				if req.StartPressurePa, err = parseQuantity(pressureQ, start); err != nil {
					return usagef("--start-pressure: %w", err)
				}
			}
			if top != "" {
				if req.MaximumPressurePa, err = parseQuantity(pressureQ, top); err != nil {
					return usagef("--max-pressure: %w", err)
				}
			}
			var ops []operatingPoint
			for _, s := range points {
				op, err := parsePoint(s)
				if err != nil {
					return usageError{err}
				}
				ops = append(ops, op)
			}
			if prefix != "" {
				if svg == "" {
					svg = prefix + ".svg"
				}
				if png == "" {
					png = prefix + ".png"
				}
			}
			resp, err := unary(a, func(ctx context.Context, c fugadv1.FugadServiceClient) (*fugadv1.PhaseEnvelopeResponse, error) {
				return c.PhaseEnvelope(ctx, req)
			})
			if err != nil {
				return err
			}
			var written []string
			if svg != "" || png != "" {
				p, err := envelopePlot(resp, "Phase envelope, "+fd.describe(3), ops, plotAxes{si: si})
				if err != nil {
					return err
				}
				for _, out := range []struct{ file, format string }{{svg, "svg"}, {png, "png"}} {
					if out.file == "" {
						continue
					}
					b, err := renderPlot(p, out.format)
					if err != nil {
						return err
					}
					if err := os.WriteFile(out.file, b, 0o644); err != nil {
						return fmt.Errorf("writing the plot: %w", err)
					}
					written = append(written, out.file)
				}
			}
			if a.g.json {
				return a.printJSON(resp)
			}
			a.printEnvelope(fd, resp, ops, list)
			for _, f := range written {
				fmt.Fprintf(a.stdout, "plot written to %s\n", f)
			}
			a.caution()
			return nil
		}
	},
}

// printEnvelope prints the envelope summary, and every point with list.
func (a *app) printEnvelope(fd *feed, r *fugadv1.PhaseEnvelopeResponse, ops []operatingPoint, list bool) {
	w := a.stdout
	a.printFeedNote(fd)
	dew, bub := 0, 0
	for _, p := range r.GetPoints() {
		if p.GetBranch() == fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_BUBBLE {
			bub++
		} else {
			dew++
		}
	}
	trace := "complete trace"
	if !r.GetComplete() {
		trace = "INCOMPLETE trace (stopped at --max-points or --max-pressure)"
	}
	fmt.Fprintf(w, "Phase envelope: %d points (%d dew, %d bubble), %s\n\n", len(r.GetPoints()), dew, bub, trace)
	tw := table(w)
	row(tw, "point", "T K", "T °C", "P MPa", "P bar")
	for i, c := range r.GetCriticalPoints() {
		name := "critical point"
		if len(r.GetCriticalPoints()) > 1 {
			name = fmt.Sprintf("critical point %d", i+1)
		}
		row(tw, name, fixed(c.GetTemperatureK(), 2), fixed(celsius(c.GetTemperatureK()), 2), num(c.GetPressurePa()/1e6, 5), num(bar(c.GetPressurePa()), 5))
	}
	if len(r.GetCriticalPoints()) == 0 {
		row(tw, "critical point", "none found", "", "", "")
	}
	for _, m := range []struct {
		name string
		p    *fugadv1.EnvelopePoint
	}{{"cricondenbar", r.GetCricondenbar()}, {"cricondentherm", r.GetCricondentherm()}} {
		if m.p == nil {
			continue
		}
		row(tw, m.name, fixed(m.p.GetTemperatureK(), 2), fixed(celsius(m.p.GetTemperatureK()), 2), num(m.p.GetPressurePa()/1e6, 5), num(bar(m.p.GetPressurePa()), 5))
	}
	for _, op := range ops {
		name := op.label
		if name == "" {
			name = "operating point"
		}
		row(tw, name+" (given)", fixed(op.temperatureK, 2), fixed(celsius(op.temperatureK), 2), num(op.pressurePa/1e6, 5), num(bar(op.pressurePa), 5))
	}
	tw.Flush()
	if list {
		fmt.Fprintln(w)
		tw = table(w)
		row(tw, "#", "branch", "T K", "T °C", "P MPa", "P bar")
		for i, p := range r.GetPoints() {
			b := "dew"
			if p.GetBranch() == fugadv1.EnvelopeBranch_ENVELOPE_BRANCH_BUBBLE {
				b = "bubble"
			}
			row(tw, fmt.Sprint(i+1), b, fixed(p.GetTemperatureK(), 3), fixed(celsius(p.GetTemperatureK()), 3), num(p.GetPressurePa()/1e6, 6), num(bar(p.GetPressurePa()), 6))
		}
		tw.Flush()
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, reportLine(r.GetReport()))
}
