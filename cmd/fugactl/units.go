package main

import (
	"fmt"
	"math"
	"regexp"
	"sort"
	"strconv"
	"strings"
)

// Unit definitions. Every factor follows from the definition of the unit:
//
//   - 1 bar = 10⁵ Pa; 1 atm = 101 325 Pa (standard atmosphere);
//   - 1 lb = 0.453 592 37 kg (international pound, 1959);
//     1 in = 0.0254 m, 1 ft = 0.3048 m (international yard and pound, 1959);
//     standard gravity g = 9.806 65 m/s² (3rd CGPM, 1901), so
//     1 lbf = 0.453 592 37 × 9.806 65 N and
//     1 psi = 1 lbf/in² = 6894.757 293 168 … Pa;
//   - 0 °C = 273.15 K; T/°F = 1.8·(T/°C) + 32; T/°R = 1.8·(T/K);
//   - 1 Btu (International Table) = 1055.055 852 62 J, so that
//     1 Btu/lb = 2326 J/kg exactly and 1 Btu/(lb·°F) = 4186.8 J/(kg·K)
//     exactly; per pound-mole the same ratios hold per mole:
//     1 Btu/lbmol = 2.326 J/mol, 1 Btu/(lbmol·°R) = 4.1868 J/(mol·K).
//
// NIST Special Publication 811, Guide for the Use of the International
// System of Units (2008), Appendix B, lists the same definitions.
const (
	pascalPerBar        = 1e5
	pascalPerAtmosphere = 101325
	kilogramPerPound    = 0.45359237
	metrePerInch        = 0.0254
	metrePerFoot        = 0.3048
	standardGravity     = 9.80665
	pascalPerPsi        = kilogramPerPound * standardGravity / (metrePerInch * metrePerInch)
	kelvinAtZeroCelsius = 273.15
	joulePerMolPerBtuLb = 2.326  // 1 Btu/lbmol in J/mol
	entropyBtuLbR       = 4.1868 // 1 Btu/(lbmol·°R) in J/(mol·K)
	molPerPoundMole     = 1000 * kilogramPerPound
	m3PerMolPerFt3Lbmol = metrePerFoot * metrePerFoot * metrePerFoot / molPerPoundMole
)

// gaugeReference is the atmospheric pressure added to gauge pressures
// (barg, psig, kPag, MPag): the standard atmosphere, 101 325 Pa. A local
// barometric pressure differs by a few kPa; state absolute pressures where
// that matters.
const gaugeReference = pascalPerAtmosphere

// unit converts a value in one unit to SI.
type unit struct {
	toSI  func(v float64) float64
	gauge bool // a gauge pressure: the standard atmosphere is added
}

func scale(f float64) unit { return unit{toSI: func(v float64) float64 { return v * f }} }

func gaugeScale(f float64) unit {
	return unit{toSI: func(v float64) float64 { return v*f + gaugeReference }, gauge: true}
}

// quantity is one kind of engineering input: its name, SI unit, the units
// it accepts (keys normalised by normUnit) and its range check.
type quantity struct {
	name     string
	si       string
	units    map[string]unit
	examples string
	// positive requires an absolute value above zero (temperatures,
	// pressures, volumes).
	positive bool
}

var (
	temperatureQ = &quantity{
		name: "temperature", si: "K", positive: true,
		examples: "313.15K, 40C, 40degC, 104F, 563.67R",
		units: map[string]unit{
			"k":    scale(1),
			"c":    {toSI: func(v float64) float64 { return v + kelvinAtZeroCelsius }},
			"degc": {toSI: func(v float64) float64 { return v + kelvinAtZeroCelsius }},
			"f":    {toSI: func(v float64) float64 { return (v-32)/1.8 + kelvinAtZeroCelsius }},
			"degf": {toSI: func(v float64) float64 { return (v-32)/1.8 + kelvinAtZeroCelsius }},
			"r":    scale(1 / 1.8),
			"degr": scale(1 / 1.8),
		},
	}
	pressureQ = &quantity{
		name: "pressure", si: "Pa", positive: true,
		examples: "7e6Pa, 7000kPa, 7MPa, 70bar, 70bara, 69barg, 1015psia, 1000psig",
		units: map[string]unit{
			"pa":   scale(1),
			"hpa":  scale(1e2),
			"kpa":  scale(1e3),
			"kpaa": scale(1e3),
			"kpag": gaugeScale(1e3),
			"mpa":  scale(1e6),
			"mpaa": scale(1e6),
			"mpag": gaugeScale(1e6),
			"mbar": scale(1e2),
			"bar":  scale(pascalPerBar),
			"bara": scale(pascalPerBar),
			"barg": gaugeScale(pascalPerBar),
			"atm":  scale(pascalPerAtmosphere),
			"psi":  scale(pascalPerPsi),
			"psia": scale(pascalPerPsi),
			"psig": gaugeScale(pascalPerPsi),
		},
	}
	molarEnergyQ = &quantity{
		name: "molar energy", si: "J/mol",
		examples: "-75000J/mol, -75kJ/mol, -75000kJ/kmol, -32244Btu/lbmol",
		units: map[string]unit{
			"j/mol":     scale(1),
			"kj/mol":    scale(1e3),
			"j/kmol":    scale(1e-3),
			"kj/kmol":   scale(1),
			"mj/kmol":   scale(1e3),
			"btu/lbmol": scale(joulePerMolPerBtuLb),
		},
	}
	molarEntropyQ = &quantity{
		name: "molar entropy", si: "J/(mol·K)",
		examples: "-20J/(mol·K), -20J/molK, -0.02kJ/(mol·K), -20kJ/(kmol·K), -4.78Btu/(lbmol·R)",
		units: map[string]unit{
			"j/(mol·k)":     scale(1),
			"kj/(mol·k)":    scale(1e3),
			"kj/(kmol·k)":   scale(1),
			"j/(kmol·k)":    scale(1e-3),
			"btu/(lbmol·r)": scale(entropyBtuLbR),
			"btu/(lbmol·f)": scale(entropyBtuLbR),
		},
	}
	molarVolumeQ = &quantity{
		name: "molar volume", si: "m³/mol", positive: true,
		examples: "2.9e-4m3/mol, 0.29L/mol, 290cm3/mol, 0.29m3/kmol, 4.65ft3/lbmol",
		units: map[string]unit{
			"m³/mol":    scale(1),
			"m³/kmol":   scale(1e-3),
			"l/mol":     scale(1e-3),
			"dm³/mol":   scale(1e-3),
			"cm³/mol":   scale(1e-6),
			"ml/mol":    scale(1e-6),
			"ft³/lbmol": scale(m3PerMolPerFt3Lbmol),
		},
	}
)

// numberRE splits an input into a decimal number and the unit after it.
var numberRE = regexp.MustCompile(`^\s*([+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?)\s*(.*?)\s*$`)

// unitReplacer normalises the spellings of a unit: degree signs, the
// multiplication dot, powers written as ^3 or 3, brackets.
var unitReplacer = strings.NewReplacer(
	"°", "deg", "º", "deg",
	"*", "·", ".", "·", "⋅", "·", " ", "",
	"^2", "²", "^3", "³",
)

// normUnit returns the lookup key of a unit spelling: lower case, with
// the variants accepted for degrees, products and powers folded together
// ("J/mol/K", "J/molK", "J/(mol*K)" and "J/(mol·K)" all give "j/(mol·k)").
func normUnit(u string) string {
	s := strings.ToLower(unitReplacer.Replace(strings.TrimSpace(u)))
	// Powers written as a trailing digit: m3, cm3, dm3, ft3.
	for _, p := range []string{"cm", "dm", "ft", "m"} {
		s = strings.ReplaceAll(s, p+"3/", p+"³/")
	}
	// Per-mole-per-kelvin forms of an entropy.
	for _, m := range []string{"kmol", "lbmol", "mol"} {
		for _, t := range []string{"k", "r", "f", "degk", "degr", "degf"} {
			for _, form := range []string{m + "/" + t, m + "·" + t, m + t, "(" + m + "·" + t + ")"} {
				if strings.HasSuffix(s, "/"+form) {
					s = strings.TrimSuffix(s, "/"+form) + "/(" + m + "·" + strings.TrimPrefix(t, "deg") + ")"
				}
			}
		}
	}
	return s
}

// parseQuantity parses an engineering input such as "40C" or "70 barg"
// into SI. A unit is required: a bare number is rejected rather than
// guessed, because 40 read as kelvin or 70 read as pascal is a valid but
// absurd request that a server would answer.
func parseQuantity(q *quantity, s string) (float64, error) {
	m := numberRE.FindStringSubmatch(s)
	if m == nil {
		return 0, fmt.Errorf("%s %q: not a number followed by a unit (e.g. %s)", q.name, s, q.examples)
	}
	if m[2] == "" {
		return 0, fmt.Errorf("%s %q has no unit; write it with one, e.g. %s", q.name, s, q.examples)
	}
	u, ok := q.units[normUnit(m[2])]
	if !ok {
		return 0, fmt.Errorf("%s %q: unknown unit %q; accepted: %s", q.name, s, m[2], q.unitList())
	}
	v, err := strconv.ParseFloat(m[1], 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, fmt.Errorf("%s %q: %q is not a finite number", q.name, s, m[1])
	}
	si := u.toSI(v)
	if math.IsInf(si, 0) || math.IsNaN(si) {
		return 0, fmt.Errorf("%s %q is out of range", q.name, s)
	}
	if q.positive && si <= 0 {
		what := "absolute " + q.name
		if u.gauge {
			what += fmt.Sprintf(" (gauge + %g Pa standard atmosphere)", float64(gaugeReference))
		}
		return 0, fmt.Errorf("%s %q gives %s %g %s, which must be positive", q.name, s, what, si, q.si)
	}
	return si, nil
}

// unitList names the accepted units of q, sorted.
func (q *quantity) unitList() string {
	names := make([]string, 0, len(q.units))
	for k := range q.units {
		names = append(names, k)
	}
	sort.Strings(names)
	return strings.Join(names, ", ") + " (case-insensitive)"
}

// parseFraction parses a vapour fraction: a number within [0, 1] or a
// percentage within [0 %, 100 %].
func parseFraction(name, s string) (float64, error) {
	t := strings.TrimSpace(s)
	pct := strings.HasSuffix(t, "%")
	t = strings.TrimSpace(strings.TrimSuffix(t, "%"))
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, fmt.Errorf("%s %q is not a number (write e.g. 0.25 or 25%%)", name, s)
	}
	if pct {
		v /= 100
	}
	if v < 0 || v > 1 {
		return 0, fmt.Errorf("%s %q must lie within 0 and 1 (0 %% and 100 %%)", name, s)
	}
	return v, nil
}

// Conversions from SI for display.
func celsius(k float64) float64 { return k - kelvinAtZeroCelsius }
func bar(pa float64) float64    { return pa / pascalPerBar }
