package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

func TestParseAmounts(t *testing.T) {
	tests := []struct {
		in    string
		names []string
		vals  []float64
		pct   bool
	}{
		{"methane=87, ethane=5.2, propane=2.4", []string{"methane", "ethane", "propane"}, []float64{87, 5.2, 2.4}, false},
		{"methane = 87 ; ethane=5.2;propane= 2.4", []string{"methane", "ethane", "propane"}, []float64{87, 5.2, 2.4}, false},
		{"methane=87% ethane=13%", []string{"methane", "ethane"}, []float64{87, 13}, true},
		{"methane=87 %, ethane=13 %", []string{"methane", "ethane"}, []float64{87, 13}, true},
		{"CO2:0.5,methane:0.5", []string{"CO2", "methane"}, []float64{0.5, 0.5}, false},
		// A name with commas but no blanks is one name.
		{"2,2-dimethylbutane=0.5, methane=99.5", []string{"2,2-dimethylbutane", "methane"}, []float64{0.5, 99.5}, false},
		{"  methane=1e-1,\n ethane=0.9 ", []string{"methane", "ethane"}, []float64{0.1, 0.9}, false},
		{"methane=0, ethane=100", []string{"methane", "ethane"}, []float64{0, 100}, false},
	}
	for _, tc := range tests {
		am, err := parseAmounts(tc.in)
		if err != nil {
			t.Errorf("%q: %v", tc.in, err)
			continue
		}
		if len(am) != len(tc.names) {
			t.Errorf("%q: %d entries, want %d: %+v", tc.in, len(am), len(tc.names), am)
			continue
		}
		for i, a := range am {
			if a.name != tc.names[i] || a.value != tc.vals[i] || a.percent != tc.pct {
				t.Errorf("%q entry %d = %+v, want %s=%g (%% %v)", tc.in, i, a, tc.names[i], tc.vals[i], tc.pct)
			}
		}
	}
}

// TestParseAmountsErrors checks that each bad string is refused with a
// message that names the offending token.
func TestParseAmountsErrors(t *testing.T) {
	tests := []struct{ in, token, why string }{
		{"methane=87, ethane=5.x", `"ethane=5.x"`, "not a finite number"},
		{"methane=87, ethane", `"ethane"`, "expected NAME=AMOUNT"},
		{"methane 87, ethane=13", `"methane"`, "expected NAME=AMOUNT"},
		{"methane=87, =13", `"="`, "missing component name"},
		{"methane=87, ethane=", `"ethane="`, "missing amount"},
		{"methane=87, ethane=-3", `"ethane=-3"`, "negative"},
		{"methane=87, Methane=13", `"Methane=13"`, "appears twice"},
		{"methane=NaN", `"methane=NaN"`, "not a finite number"},
		{"methane=inf", `"methane=inf"`, "not a finite number"},
		{"", "", "no components"},
		{" , ; ", "", "no components"},
	}
	for _, tc := range tests {
		_, err := parseAmounts(tc.in)
		if err == nil {
			t.Errorf("%q: accepted", tc.in)
			continue
		}
		if !strings.Contains(err.Error(), tc.token) || !strings.Contains(err.Error(), tc.why) {
			t.Errorf("%q: error %q; want it to name %s and say %q", tc.in, err, tc.token, tc.why)
		}
	}
}

func TestToComposition(t *testing.T) {
	mustAmounts := func(s string) []amount {
		am, err := parseAmounts(s)
		if err != nil {
			t.Fatal(err)
		}
		return am
	}
	tests := []struct {
		in, basis string
		force     bool
		want      []float64
		gotBasis  string
		note      bool
	}{
		{"a=87, b=13", basisAuto, false, []float64{0.87, 0.13}, basisPercent, false},
		{"a=0.87, b=0.13", basisAuto, false, []float64{0.87, 0.13}, basisFraction, false},
		{"a=87%, b=13%", basisAuto, false, []float64{0.87, 0.13}, basisPercent, false},
		{"a=87, b=12.9", basisAuto, false, []float64{87 / 99.9, 12.9 / 99.9}, basisPercent, true},
		{"a=0.5, b=0.5", basisPercent, true, []float64{0.5, 0.5}, basisPercent, true}, // 1 % summed, forced
		{"a=3, b=1", basisFraction, true, []float64{0.75, 0.25}, basisFraction, true},
		{"a=1", basisAuto, false, []float64{1}, basisFraction, false},
		{"a=100", basisAuto, false, []float64{1}, basisPercent, false},
	}
	for _, tc := range tests {
		c, err := toComposition(mustAmounts(tc.in), tc.basis, tc.force)
		if err != nil {
			t.Errorf("%q (%s): %v", tc.in, tc.basis, err)
			continue
		}
		if c.basis != tc.gotBasis || (c.note != "") != tc.note {
			t.Errorf("%q: basis %s note %q, want %s note %v", tc.in, c.basis, c.note, tc.gotBasis, tc.note)
		}
		sum := 0.0
		for i, x := range c.fractions {
			sum += x
			if !closeTo(x, tc.want[i], 1e-14) {
				t.Errorf("%q: x[%d] = %.17g, want %.17g", tc.in, i, x, tc.want[i])
			}
		}
		if !closeTo(sum, 1, 1e-14) {
			t.Errorf("%q: fractions sum to %.17g", tc.in, sum)
		}
	}
	bad := []struct{ in, basis, why string }{
		{"a=50, b=30", basisAuto, "neither about 1"},
		{"a=50%, b=30", basisAuto, "mixed bases"},
		{"a=80, b=10", basisPercent, "more than 2 % away"},
		{"a=0, b=0", basisAuto, "neither about 1"},
		{"a=0, b=0", basisFraction, "sum to zero"},
		{"a=50%, b=50%", basisFraction, "written with %"},
		{"a=1", "moles", `--basis "moles"`},
	}
	for _, tc := range bad {
		if _, err := toComposition(mustAmounts(tc.in), tc.basis, false); err == nil || !strings.Contains(err.Error(), tc.why) {
			t.Errorf("%q (%s): error %v, want %q", tc.in, tc.basis, err, tc.why)
		}
	}
}

func TestFluidBuild(t *testing.T) {
	f := fluidFlags{fluid: "methane=87, CO2=13", model: "pr78", basis: basisAuto}
	fd, err := f.build(false)
	if err != nil {
		t.Fatal(err)
	}
	if fd.fluid.GetModel() != fugadv1.Model_MODEL_PR78 || len(fd.fluid.GetComponents()) != 2 ||
		fd.fluid.GetComponents()[1].GetId() != "CO2" || fd.fluid.GetVolumeTranslation() {
		t.Errorf("fluid %v", fd.fluid)
	}
	if _, err := (&fluidFlags{fluid: "methane=1"}).build(false); err == nil || !strings.Contains(err.Error(), "--model is required") {
		t.Errorf("no model: %v", err)
	}
	if _, err := (&fluidFlags{fluid: "methane=1", model: "PR99"}).build(false); err == nil || !strings.Contains(err.Error(), `"PR99"`) {
		t.Errorf("bad model: %v", err)
	}
	if _, err := (&fluidFlags{model: "SRK"}).build(false); err == nil || !strings.Contains(err.Error(), "--fluid is required") {
		t.Errorf("no fluid: %v", err)
	}
}

// TestFluidFile checks that a protojson Fluid file supplies the fluid and
// that --fluid amounts are put into its component order.
func TestFluidFile(t *testing.T) {
	dir := t.TempDir()
	file := filepath.Join(dir, "kestrel-inlet.json")
	// A fictional fluid with a pseudo-component and a k_ij override.
	const js = `{
	  "model": "MODEL_SRK",
	  "components": [
	    {"id": "methane"},
	    {"id": "carbon-dioxide"},
	    {"pseudo": {"id": "kr-c7plus", "specific_gravity": 0.74, "normal_boiling_point_k": 371.6}}
	  ],
	  "interaction_parameters": [{"i": 0, "j": 1, "k0": 0.1}],
	  "volume_translation": true
	}`
	if err := os.WriteFile(file, []byte(js), 0o644); err != nil {
		t.Fatal(err)
	}
	f := fluidFlags{file: file, fluid: "kr-c7plus=2, methane=90, carbon-dioxide=8", basis: basisAuto}
	fd, err := f.build(false)
	if err != nil {
		t.Fatal(err)
	}
	want := []float64{0.90, 0.08, 0.02}
	for i, x := range fd.comp.fractions {
		if !closeTo(x, want[i], 1e-14) {
			t.Errorf("x = %v, want %v", fd.comp.fractions, want)
		}
	}
	if fd.comp.names[2] != "kr-c7plus" || fd.fluid.GetModel() != fugadv1.Model_MODEL_SRK || !fd.fluid.GetVolumeTranslation() ||
		len(fd.fluid.GetInteractionParameters()) != 1 {
		t.Errorf("fluid %v names %v", fd.fluid, fd.comp.names)
	}
	// --model overrides the file; --volume-translation given as false too.
	f.model = "PR76"
	fd, err = f.build(true)
	if err != nil {
		t.Fatal(err)
	}
	if fd.fluid.GetModel() != fugadv1.Model_MODEL_PR76 || fd.fluid.GetVolumeTranslation() {
		t.Errorf("overrides not applied: %v", fd.fluid)
	}
	for _, tc := range []struct{ fluid, why string }{
		{"methane=90, carbon-dioxide=10", `"kr-c7plus" of`},
		{"methane=90, carbon-dioxide=8, kr-c7plus=1, ethane=1", `"ethane" is not a component`},
	} {
		f := fluidFlags{file: file, fluid: tc.fluid, basis: basisAuto}
		if _, err := f.build(false); err == nil || !strings.Contains(err.Error(), tc.why) {
			t.Errorf("%q: %v, want %q", tc.fluid, err, tc.why)
		}
	}
	bad := filepath.Join(dir, "bad.json")
	_ = os.WriteFile(bad, []byte(`{"model": "MODEL_SRK", "componentz": []}`), 0o644)
	if _, err := (&fluidFlags{file: bad, fluid: "methane=1"}).build(false); err == nil || !strings.Contains(err.Error(), "not a protojson fugad.v1.Fluid") {
		t.Errorf("bad file: %v", err)
	}
}
