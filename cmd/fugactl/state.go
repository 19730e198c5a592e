package main

import (
	"flag"
	"fmt"
	"sort"
	"strings"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Specification variables of a flash state, by key. The flags -T, -P, -H,
// -S, -V, -U and --beta set them on the command line; batch files and
// stream lines name them by the same keys (case-insensitive) or the long
// names.
const (
	keyT    = "T"
	keyP    = "P"
	keyH    = "H"
	keyS    = "S"
	keyV    = "V"
	keyU    = "U"
	keyBeta = "beta"
)

// keyAliases maps every accepted spelling (lower case) to its key.
var keyAliases = map[string]string{
	"t": keyT, "temperature": keyT,
	"p": keyP, "pressure": keyP,
	"h": keyH, "enthalpy": keyH,
	"s": keyS, "entropy": keyS,
	"v": keyV, "volume": keyV,
	"u": keyU, "energy": keyU, "internal-energy": keyU,
	"beta": keyBeta, "vapour-fraction": keyBeta, "vapor-fraction": keyBeta, "vf": keyBeta, "β": keyBeta,
}

// specPairs are the accepted pairs of specification variables and the
// state each builds.
var specPairs = map[[2]string]string{
	{keyP, keyT}:    "T–P",
	{keyH, keyP}:    "P–H",
	{keyP, keyS}:    "P–S",
	{keyT, keyV}:    "T–V",
	{keyU, keyV}:    "U–V",
	{keyP, keyBeta}: "P–β",
	{keyT, keyBeta}: "T–β",
}

// specList names the accepted pairs for error messages.
const specList = "T+P, P+H, P+S, T+V, U+V, P+beta, T+beta"

// stateFlags are the specification flags of a command.
type stateFlags struct {
	vals map[string]*string
}

// register adds -T/--temperature and friends to fs; only for the keys
// given.
func (s *stateFlags) register(fs *flag.FlagSet, keys ...string) {
	s.vals = map[string]*string{}
	help := map[string][2]string{
		keyT:    {"temperature", "temperature with unit, e.g. 40C, 313.15K, 104F"},
		keyP:    {"pressure", "pressure with unit, e.g. 70bar, 7MPa, 69barg, 1000psig"},
		keyH:    {"enthalpy", "molar enthalpy of the feed with unit, e.g. -79.2kJ/mol"},
		keyS:    {"entropy", "molar entropy of the feed with unit, e.g. -25J/(mol·K)"},
		keyV:    {"volume", "overall molar volume with unit, e.g. 0.3L/mol, 3e-4m3/mol"},
		keyU:    {"energy", "molar internal energy of the feed with unit, e.g. -81kJ/mol"},
		keyBeta: {"vapour-fraction", "molar vapour fraction, 0…1 or 0%…100% (0 bubble point, 1 dew point)"},
	}
	for _, k := range keys {
		v := new(string)
		s.vals[k] = v
		h := help[k]
		fs.StringVar(v, k, "", h[1])
		fs.StringVar(v, h[0], "", h[1])
	}
}

// fields returns the specification flags that were given.
func (s *stateFlags) fields() map[string]string {
	out := map[string]string{}
	for k, v := range s.vals {
		if *v != "" {
			out[k] = *v
		}
	}
	return out
}

// canonFields maps user keys (any accepted spelling) to keys, rejecting
// unknown and repeated keys.
func canonFields(in map[string]string) (map[string]string, error) {
	out := map[string]string{}
	for k, v := range in {
		c, ok := keyAliases[strings.ToLower(strings.TrimSpace(k))]
		if !ok {
			return nil, fmt.Errorf("unknown variable %q: want T, P, H, S, V, U or beta", k)
		}
		if _, dup := out[c]; dup {
			return nil, fmt.Errorf("%s given twice", c)
		}
		out[c] = v
	}
	return out, nil
}

// buildState makes a FlashState from two specification variables (keys as
// in keyAliases, values with units) and a feed composition (nil leaves
// mole_fractions empty: the default of a batch or stream).
func buildState(fields map[string]string, x []float64) (*fugadv1.FlashState, string, error) {
	var keys []string
	for k := range fields {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	if len(keys) != 2 {
		got := "none"
		if len(keys) > 0 {
			got = strings.Join(keys, "+")
		}
		return nil, "", fmt.Errorf("a state needs exactly two specification variables (%s); got %s", specList, got)
	}
	kind, ok := specPairs[[2]string{keys[0], keys[1]}]
	if !ok {
		return nil, "", fmt.Errorf("%s+%s is not a specification; use one of %s", keys[0], keys[1], specList)
	}
	get := func(k string) (float64, error) {
		v := fields[k]
		switch k {
		case keyT:
			return parseQuantity(temperatureQ, v)
		case keyP:
			return parseQuantity(pressureQ, v)
		case keyH, keyU:
			return parseQuantity(molarEnergyQ, v)
		case keyS:
			return parseQuantity(molarEntropyQ, v)
		case keyV:
			return parseQuantity(molarVolumeQ, v)
		case keyBeta:
			return parseFraction("vapour fraction", v)
		}
		return 0, fmt.Errorf("unknown variable %s", k)
	}
	vals := map[string]float64{}
	for _, k := range keys {
		v, err := get(k)
		if err != nil {
			return nil, "", err
		}
		vals[k] = v
	}
	st := &fugadv1.FlashState{MoleFractions: x}
	switch kind {
	case "T–P":
		st.Specification = &fugadv1.FlashState_Tp{Tp: &fugadv1.TemperaturePressure{TemperatureK: vals[keyT], PressurePa: vals[keyP]}}
	case "P–H":
		st.Specification = &fugadv1.FlashState_Ph{Ph: &fugadv1.PressureEnthalpy{PressurePa: vals[keyP], MolarEnthalpyJPerMol: vals[keyH]}}
	case "P–S":
		st.Specification = &fugadv1.FlashState_Ps{Ps: &fugadv1.PressureEntropy{PressurePa: vals[keyP], MolarEntropyJPerMolK: vals[keyS]}}
	case "T–V":
		st.Specification = &fugadv1.FlashState_Tv{Tv: &fugadv1.TemperatureVolume{TemperatureK: vals[keyT], MolarVolumeM3PerMol: vals[keyV]}}
	case "U–V":
		st.Specification = &fugadv1.FlashState_Uv{Uv: &fugadv1.InternalEnergyVolume{MolarInternalEnergyJPerMol: vals[keyU], MolarVolumeM3PerMol: vals[keyV]}}
	case "P–β":
		st.Specification = &fugadv1.FlashState_PVapourFraction{PVapourFraction: &fugadv1.PressureVapourFraction{PressurePa: vals[keyP], VapourFraction: vals[keyBeta]}}
	case "T–β":
		st.Specification = &fugadv1.FlashState_TVapourFraction{TVapourFraction: &fugadv1.TemperatureVapourFraction{TemperatureK: vals[keyT], VapourFraction: vals[keyBeta]}}
	}
	return st, kind, nil
}

// specText describes a state's specification in engineering units.
func specText(st *fugadv1.FlashState) string {
	switch s := st.GetSpecification().(type) {
	case *fugadv1.FlashState_Tp:
		return fmt.Sprintf("T–P: T %s, P %s", tempText(s.Tp.GetTemperatureK()), presText(s.Tp.GetPressurePa()))
	case *fugadv1.FlashState_Ph:
		return fmt.Sprintf("P–H: P %s, H %s J/mol", presText(s.Ph.GetPressurePa()), num(s.Ph.GetMolarEnthalpyJPerMol(), 6))
	case *fugadv1.FlashState_Ps:
		return fmt.Sprintf("P–S: P %s, S %s J/(mol·K)", presText(s.Ps.GetPressurePa()), num(s.Ps.GetMolarEntropyJPerMolK(), 6))
	case *fugadv1.FlashState_Tv:
		return fmt.Sprintf("T–V: T %s, V %s m³/mol", tempText(s.Tv.GetTemperatureK()), num(s.Tv.GetMolarVolumeM3PerMol(), 6))
	case *fugadv1.FlashState_Uv:
		return fmt.Sprintf("U–V: U %s J/mol, V %s m³/mol", num(s.Uv.GetMolarInternalEnergyJPerMol(), 6), num(s.Uv.GetMolarVolumeM3PerMol(), 6))
	case *fugadv1.FlashState_PVapourFraction:
		return fmt.Sprintf("P–β: P %s, β %s", presText(s.PVapourFraction.GetPressurePa()), num(s.PVapourFraction.GetVapourFraction(), 6))
	case *fugadv1.FlashState_TVapourFraction:
		return fmt.Sprintf("T–β: T %s, β %s", tempText(s.TVapourFraction.GetTemperatureK()), num(s.TVapourFraction.GetVapourFraction(), 6))
	}
	return "no specification"
}

// solverFlags are the SolverOptions flags.
type solverFlags struct {
	tolerance     float64
	maxIterations uint
}

func (s *solverFlags) register(fs *flag.FlagSet) {
	fs.Float64Var(&s.tolerance, "tolerance", 0, "solver tolerance on max|Δln f| (0: server default 1e-10; within 1e-14…1e-4)")
	fs.UintVar(&s.maxIterations, "max-iterations", 0, "iteration cap per solver stage (0: server default; at most 10000)")
}

// options returns the SolverOptions, nil when both are defaults.
func (s *solverFlags) options() *fugadv1.SolverOptions {
	if s.tolerance == 0 && s.maxIterations == 0 {
		return nil
	}
	return &fugadv1.SolverOptions{Tolerance: s.tolerance, MaxIterations: uint32(s.maxIterations)}
}

// registerFluid adds the fluid flags to fs.
func (f *fluidFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&f.fluid, "fluid", "", `components and amounts, e.g. "methane=87, ethane=5.2, propane=2.4" (mole % or fractions; see --basis)`)
	fs.StringVar(&f.file, "fluid-file", "", "protojson fugad.v1.Fluid file; --fluid then gives the amounts of its components by id")
	fs.StringVar(&f.model, "model", "", "equation of state: PR76, PR78 or SRK")
	fs.StringVar(&f.basis, "basis", basisAuto, "basis of the --fluid amounts: auto (% suffix, or by the sum: ≈100 percent, ≈1 fraction), percent, fraction")
	fs.BoolVar(&f.normalise, "normalise", false, "rescale amounts of any sum to 100 % (otherwise a sum more than 2 % off is refused)")
	fs.BoolVar(&f.translation, "volume-translation", false, "apply the Péneloux (1982) volume translation (densities only; equilibrium is unchanged)")
}

// flagSet reports whether the flag name was given on the command line.
func flagSet(fs *flag.FlagSet, name string) bool {
	set := false
	fs.Visit(func(f *flag.Flag) {
		if f.Name == name {
			set = true
		}
	})
	return set
}

// buildFeed builds the fluid from its flags, as a usage error on failure.
func buildFeed(f *fluidFlags, fs *flag.FlagSet) (*feed, error) {
	fd, err := f.build(flagSet(fs, "volume-translation"))
	if err != nil {
		return nil, usageError{err}
	}
	return fd, nil
}

// noArgs rejects positional arguments.
func noArgs(args []string) error {
	if len(args) > 0 {
		return usagef("unexpected argument %q (values go in flags, e.g. -T 40C)", args[0])
	}
	return nil
}
