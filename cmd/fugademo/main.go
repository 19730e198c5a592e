// Command fugademo prints a worked fugacity calculation with the fugad
// thermodynamic core, for a fictional stream: the inlet gas of the
// "Kestrel Ridge" gas plant at its inlet separator conditions.
//
// It shows the library used directly, without the server: compile a
// fluid once, then evaluate fugacity coefficients and phase properties.
//
//	go run ./cmd/fugademo [-model PR78] [-T 300] [-P 7e6]
package main

import (
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"text/tabwriter"

	"github.com/fugad/fugad/thermo/component"
	"github.com/fugad/fugad/thermo/eos"
)

// The demo stream is invented for this example.
var demoIDs = []string{"nitrogen", "carbon-dioxide", "methane", "ethane", "propane", "isobutane", "n-butane", "isopentane", "n-pentane", "n-hexane"}
var demoX = []float64{0.012, 0.018, 0.870, 0.052, 0.024, 0.007, 0.008, 0.003, 0.003, 0.003}

func main() {
	model := flag.String("model", "PR78", "equation of state: PR76, PR78 or SRK")
	T := flag.Float64("T", 300, "temperature, K")
	P := flag.Float64("P", 7e6, "pressure, Pa")
	flag.Parse()
	if err := run(os.Stdout, *model, *T, *P); err != nil {
		fmt.Fprintln(os.Stderr, "fugademo:", err)
		os.Exit(1)
	}
}

func run(w io.Writer, modelName string, T, P float64) error {
	model, err := eos.ParseModel(modelName)
	if err != nil {
		return err
	}
	comps := make([]component.Component, len(demoIDs))
	for i, id := range demoIDs {
		if comps[i], err = component.Lookup(id); err != nil {
			return err
		}
	}
	mx, err := eos.NewMixture(model, comps, eos.Options{VolumeTranslation: true})
	if err != nil {
		return err
	}
	ws := mx.NewWorkspace()
	f := mx.NewFugacity()
	if err := mx.Fugacity(ws, T, P, demoX, eos.RootMinGibbs, 0, f); err != nil {
		return err
	}
	p, err := mx.Properties(ws, T, P, demoX, eos.RootMinGibbs)
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "Kestrel Ridge inlet gas (fictional), %s, T = %.2f K, P = %.4g Pa\n", model.Description(), T, P)
	fmt.Fprintf(w, "component data %s; root: %s (%d real root(s))\n\n", component.DataVersion, f.Branch, f.Roots)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "component\tx\tln φ\tφ\tfugacity, Pa\t")
	for i, c := range comps {
		phi := math.Exp(f.LnPhi[i])
		fmt.Fprintf(tw, "%s\t%.4f\t%.5f\t%.5f\t%.5g\t\n", c.ID, demoX[i], f.LnPhi[i], phi, demoX[i]*phi*P)
	}
	tw.Flush()
	fmt.Fprintf(w, "\nZ %.5f   molar volume %.5g m³/mol   density %.4g kg/m³   molar mass %.5g kg/mol\n", p.Z, p.MolarVolume, p.MassDensity, p.MolarMass)
	fmt.Fprintf(w, "H %.6g J/mol   S %.6g J/(mol·K)   Cp %.5g J/(mol·K)   Cv %.5g J/(mol·K)\n", p.H, p.S, p.Cp, p.Cv)
	fmt.Fprintf(w, "speed of sound %.5g m/s   Joule–Thomson %.4g K/MPa   compressibility %.4g 1/MPa\n", p.SpeedOfSound, p.JouleThomson*1e6, p.Compressivity*1e6)
	fmt.Fprintln(w, "\nThis is a single-phase evaluation on the stable root; it does not test phase stability.")
	fmt.Fprintln(w, "Results are engineering estimates from a published cubic equation of state. They are not a basis for")
	fmt.Fprintln(w, "the design of pressure-relief, flare or other safety systems: follow the applicable codes and have a")
	fmt.Fprintln(w, "licensed engineer check any such design.")
	return nil
}
