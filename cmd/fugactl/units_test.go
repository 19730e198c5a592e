package main

import (
	"math"
	"strings"
	"testing"
)

// close reports whether got is within rel (relative) of want, or within
// abs of it for values near zero.
func closeTo(got, want, rel float64) bool {
	return math.Abs(got-want) <= rel*math.Max(math.Abs(want), 1e-300) || got == want
}

// TestParseQuantity checks conversions to SI against values that follow
// from the definitions of the units (NIST SP 811, 2008, Appendix B):
// 0 °C = 273.15 K, °F = 1.8 °C + 32, °R = 1.8 K; 1 bar = 1e5 Pa,
// 1 atm = 101 325 Pa, 1 psi = 0.45359237 kg × 9.80665 m/s² / (0.0254 m)²
// = 6894.757 293 168 Pa; 1 Btu_IT/lbmol = 2.326 J/mol,
// 1 Btu_IT/(lbmol·°R) = 4.1868 J/(mol·K); 1 ft³/lbmol = 0.3048³ m³ /
// 453.59237 mol.
func TestParseQuantity(t *testing.T) {
	const psi = 6894.757293168361 // Pa, from the definitions above
	tests := []struct {
		q    *quantity
		in   string
		want float64
	}{
		// Temperatures.
		{temperatureQ, "273.15K", 273.15},
		{temperatureQ, "0C", 273.15},
		{temperatureQ, "0 °C", 273.15},
		{temperatureQ, "25degC", 298.15},
		{temperatureQ, "25 degC", 298.15},
		{temperatureQ, "40C", 313.15},
		{temperatureQ, "-40C", 233.15},
		{temperatureQ, "-40F", 233.15}, // −40 °F = −40 °C
		{temperatureQ, "32F", 273.15},
		{temperatureQ, "212°F", 373.15},
		{temperatureQ, "104 degF", 313.15},
		{temperatureQ, "491.67R", 273.15},
		{temperatureQ, "1.5e2K", 150},
		{temperatureQ, "-161.5C", 111.65}, // a typical LNG storage temperature
		// Pressures.
		{pressureQ, "101325Pa", 101325},
		{pressureQ, "1atm", 101325},
		{pressureQ, "1bar", 1e5},
		{pressureQ, "70bar", 7e6},
		{pressureQ, "70 bara", 7e6},
		{pressureQ, "0barg", 101325},
		{pressureQ, "69barg", 69e5 + 101325}, // gauge: + 1.01325 bar
		{pressureQ, "7MPa", 7e6},
		{pressureQ, "7000kPa", 7e6},
		{pressureQ, "100kPag", 201325},
		{pressureQ, "1MPag", 1101325},
		{pressureQ, "1013.25hPa", 101325},
		{pressureQ, "1013.25mbar", 101325},
		{pressureQ, "1psi", psi},
		{pressureQ, "1psia", psi},
		{pressureQ, "14.69594877551345psia", 101325}, // 1 atm in psi, from the definitions
		{pressureQ, "0psig", 101325},
		{pressureQ, "1000psig", 1000*psi + 101325},
		// Molar energies.
		{molarEnergyQ, "-75000J/mol", -75000},
		{molarEnergyQ, "-75kJ/mol", -75000},
		{molarEnergyQ, "-75000kJ/kmol", -75000},
		{molarEnergyQ, "-75MJ/kmol", -75000},
		{molarEnergyQ, "1000J/kmol", 1},
		{molarEnergyQ, "1Btu/lbmol", 2.326},
		// Molar entropies, in the spellings users write.
		{molarEntropyQ, "-20J/(mol·K)", -20},
		{molarEntropyQ, "-20 J/(mol*K)", -20},
		{molarEntropyQ, "-20J/mol/K", -20},
		{molarEntropyQ, "-20J/molK", -20},
		{molarEntropyQ, "-20J/mol.K", -20},
		{molarEntropyQ, "-20J/(mol·°K)", -20},
		{molarEntropyQ, "-0.02kJ/(mol·K)", -20},
		{molarEntropyQ, "-20kJ/(kmol·K)", -20},
		{molarEntropyQ, "-20kJ/kmol/K", -20},
		{molarEntropyQ, "1Btu/(lbmol·R)", 4.1868},
		{molarEntropyQ, "1Btu/lbmol/°F", 4.1868},
		// Molar volumes.
		{molarVolumeQ, "2.9e-4m3/mol", 2.9e-4},
		{molarVolumeQ, "2.9e-4 m³/mol", 2.9e-4},
		{molarVolumeQ, "0.29L/mol", 2.9e-4},
		{molarVolumeQ, "0.29dm3/mol", 2.9e-4},
		{molarVolumeQ, "0.29m3/kmol", 2.9e-4},
		{molarVolumeQ, "290cm3/mol", 2.9e-4},
		{molarVolumeQ, "290mL/mol", 2.9e-4},
		{molarVolumeQ, "1ft3/lbmol", 0.028316846592 / 453.59237},
	}
	for _, tc := range tests {
		got, err := parseQuantity(tc.q, tc.in)
		if err != nil {
			t.Errorf("%s %q: %v", tc.q.name, tc.in, err)
			continue
		}
		if !closeTo(got, tc.want, 1e-12) {
			t.Errorf("%s %q = %.15g %s, want %.15g", tc.q.name, tc.in, got, tc.q.si, tc.want)
		}
	}
}

// TestPsiFromDefinition checks the derived psi constant against the value
// quoted to seven significant figures in NIST SP 811 (2008), B.8:
// 1 psi = 6.894 757 E+03 Pa.
func TestPsiFromDefinition(t *testing.T) {
	if math.Abs(pascalPerPsi-6894.757) > 0.0005 {
		t.Errorf("psi = %.9g Pa, want 6894.757", pascalPerPsi)
	}
}

// TestParseQuantityErrors checks that bad inputs are refused with a
// message naming the input and the problem.
func TestParseQuantityErrors(t *testing.T) {
	tests := []struct {
		q      *quantity
		in     string
		substr []string
	}{
		{temperatureQ, "40", []string{`"40"`, "no unit"}},
		{temperatureQ, "40 bar", []string{`unknown unit "bar"`, "degc"}},
		{temperatureQ, "abc", []string{`"abc"`, "not a number"}},
		{temperatureQ, "nanK", []string{"not a number"}},
		{temperatureQ, "-300C", []string{"must be positive"}},
		{temperatureQ, "1e400K", []string{"not a finite number"}},
		{pressureQ, "-2barg", []string{"gauge", "must be positive"}},
		{pressureQ, "0bar", []string{"must be positive"}},
		{pressureQ, "70 bars", []string{`unknown unit "bars"`}},
		{pressureQ, "", []string{"not a number"}},
		{molarEnergyQ, "-75kJ/kg", []string{`unknown unit "kJ/kg"`}},
		{molarVolumeQ, "-1L/mol", []string{"must be positive"}},
	}
	for _, tc := range tests {
		_, err := parseQuantity(tc.q, tc.in)
		if err == nil {
			t.Errorf("%s %q: accepted", tc.q.name, tc.in)
			continue
		}
		for _, s := range tc.substr {
			if !strings.Contains(err.Error(), s) {
				t.Errorf("%s %q: error %q lacks %q", tc.q.name, tc.in, err, s)
			}
		}
	}
}

func TestParseFraction(t *testing.T) {
	good := map[string]float64{"0": 0, "1": 1, "0.25": 0.25, "25%": 0.25, "25 %": 0.25, "100%": 1}
	for in, want := range good {
		got, err := parseFraction("vapour fraction", in)
		if err != nil || got != want {
			t.Errorf("%q = %v, %v; want %v", in, got, err, want)
		}
	}
	for _, in := range []string{"1.5", "-0.1", "120%", "x", "NaN", ""} {
		if _, err := parseFraction("vapour fraction", in); err == nil {
			t.Errorf("%q accepted", in)
		}
	}
}
