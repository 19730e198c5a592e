package main

import (
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"

	"google.golang.org/protobuf/encoding/protojson"

	fugadv1 "github.com/fugad/fugad/api/fugad/v1"
)

// Composition basis of the --fluid string.
const (
	basisAuto     = "auto"
	basisPercent  = "percent"
	basisFraction = "fraction"
)

// normaliseWindow is how far (relative) a composition's sum may stray from
// 100 % before it is refused instead of normalised: analyses rounded to a
// few digits sum to 99.9–100.1 %; a larger gap usually means a missing or
// mistyped component.
const normaliseWindow = 0.02

// amount is one "name=value" entry of a composition string.
type amount struct {
	name    string
	value   float64
	percent bool // written with a % suffix
}

// parseAmounts reads a composition string such as
//
//	methane=87, ethane=5.2%, propane = 2.4; n-butane=1
//
// Entries are separated by commas, semicolons or blanks; a name runs up to
// '=' (or ':') and may itself contain commas without blanks (e.g.
// "2,2-dimethylbutane"). Each amount is a finite non-negative number with
// an optional '%'. Names must be unique (case-insensitive).
func parseAmounts(s string) ([]amount, error) {
	var out []amount
	seen := map[string]bool{}
	isSep := func(c byte) bool { return c == ',' || c == ';' || c == ' ' || c == '\t' || c == '\n' || c == '\r' }
	i := 0
	for {
		for i < len(s) && isSep(s[i]) {
			i++
		}
		if i >= len(s) {
			break
		}
		start := i
		eq := strings.IndexAny(s[i:], "=:")
		if eq < 0 {
			return nil, fmt.Errorf("entry %q: expected NAME=AMOUNT", strings.TrimSpace(s[start:]))
		}
		name := strings.TrimSpace(s[i : i+eq])
		if j := strings.IndexAny(name, " \t;"); j >= 0 || strings.Contains(name, ", ") {
			bad := name
			if j >= 0 {
				bad = name[:j]
			} else {
				bad = name[:strings.Index(name, ", ")]
			}
			return nil, fmt.Errorf("entry %q: expected NAME=AMOUNT", strings.TrimRight(bad, ","))
		}
		if name == "" {
			return nil, fmt.Errorf("entry %q: missing component name before %q", strings.TrimSpace(s[start:min(len(s), i+eq+1)]), s[i+eq:i+eq+1])
		}
		i += eq + 1
		for i < len(s) && (s[i] == ' ' || s[i] == '\t') {
			i++
		}
		vs := i
		for i < len(s) && !isSep(s[i]) && s[i] != '%' {
			i++
		}
		val := s[vs:i]
		if rest := strings.TrimLeft(s[i:], " \t"); strings.HasPrefix(rest, "%") {
			i = len(s) - len(rest)
		}
		pct := false
		if i < len(s) && s[i] == '%' {
			pct = true
			i++
		}
		token := strings.TrimSpace(s[start:i])
		if val == "" {
			return nil, fmt.Errorf("entry %q: missing amount for %s", token, name)
		}
		v, err := strconv.ParseFloat(val, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("entry %q: amount %q of %s is not a finite number", token, val, name)
		}
		if v < 0 {
			return nil, fmt.Errorf("entry %q: amount of %s is negative", token, name)
		}
		key := strings.ToLower(name)
		if seen[key] {
			return nil, fmt.Errorf("entry %q: %s appears twice", token, name)
		}
		seen[key] = true
		out = append(out, amount{name: name, value: v, percent: pct})
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("no components: write e.g. \"methane=87, ethane=5.2, propane=2.4\"")
	}
	return out, nil
}

// composition is a normalised feed: names and mole fractions summing to 1.
type composition struct {
	names     []string
	fractions []float64
	// basis used to read the amounts (percent or fraction), and the sum as
	// written, in that basis; note is set when the sum was normalised.
	basis string
	sum   float64
	note  string
}

// toComposition converts amounts to mole fractions. basis is auto,
// percent or fraction; auto reads amounts with '%' as mole percent, and
// plain amounts as fractions when they sum to about 1 and as percent when
// they sum to about 100. A sum within normaliseWindow of the basis total
// is normalised (and the note says so); a sum farther off is refused
// unless force is set.
func toComposition(am []amount, basis string, force bool) (*composition, error) {
	nPct := 0
	sum := 0.0
	for _, a := range am {
		if a.percent {
			nPct++
		}
		sum += a.value
	}
	if nPct > 0 && nPct < len(am) {
		return nil, fmt.Errorf("mixed bases: some amounts have %% and some do not; write all with %% or set --basis")
	}
	switch basis {
	case basisAuto, "":
		switch {
		case nPct > 0:
			basis = basisPercent
		case math.Abs(sum-1) <= normaliseWindow:
			basis = basisFraction
		case math.Abs(sum-100) <= 100*normaliseWindow:
			basis = basisPercent
		default:
			return nil, fmt.Errorf("amounts sum to %g, neither about 1 (mole fractions) nor about 100 (mole %%); set --basis percent or fraction (with --normalise to rescale any sum)", sum)
		}
	case basisPercent:
	case basisFraction:
		if nPct > 0 {
			return nil, fmt.Errorf("--basis fraction, but amounts are written with %%")
		}
	default:
		return nil, fmt.Errorf("--basis %q: want auto, percent or fraction", basis)
	}
	total := 1.0
	if basis == basisPercent {
		total = 100
	}
	if sum <= 0 {
		return nil, fmt.Errorf("amounts sum to zero")
	}
	c := &composition{basis: basis, sum: sum}
	rel := math.Abs(sum-total) / total
	if rel > normaliseWindow && !force {
		return nil, fmt.Errorf("amounts sum to %g %s, more than %g %% away from %g; check for a missing component, or pass --normalise", sum, basisUnit(basis), 100*normaliseWindow, total)
	}
	if rel > 1e-9 {
		c.note = fmt.Sprintf("amounts summed to %g %s and were normalised", sum, basisUnit(basis))
	}
	for _, a := range am {
		c.names = append(c.names, a.name)
		c.fractions = append(c.fractions, a.value/sum)
	}
	return c, nil
}

func basisUnit(b string) string {
	if b == basisPercent {
		return "mol %"
	}
	return "(mole fractions)"
}

// parseModel reads a model name (PR76, PR78, SRK; case-insensitive).
func parseModel(s string) (fugadv1.Model, error) {
	switch strings.ToUpper(strings.TrimSpace(s)) {
	case "PR76", "PR":
		return fugadv1.Model_MODEL_PR76, nil
	case "PR78":
		return fugadv1.Model_MODEL_PR78, nil
	case "SRK":
		return fugadv1.Model_MODEL_SRK, nil
	}
	return fugadv1.Model_MODEL_UNSPECIFIED, fmt.Errorf("--model %q: want PR76, PR78 or SRK (see fugactl models)", s)
}

// modelName is the short name of a wire model.
func modelName(m fugadv1.Model) string {
	return strings.TrimPrefix(m.String(), "MODEL_")
}

// fluidFlags are the flags that define the fluid and feed.
type fluidFlags struct {
	fluid       string
	file        string
	model       string
	basis       string
	normalise   bool
	translation bool
}

// feed is the fluid and composition a command sends.
type feed struct {
	fluid *fugadv1.Fluid
	comp  *composition
}

// componentID is the name of a ComponentSpec as used in composition strings.
func componentID(c *fugadv1.ComponentSpec) string {
	switch s := c.GetSource().(type) {
	case *fugadv1.ComponentSpec_Id:
		return s.Id
	case *fugadv1.ComponentSpec_User:
		return s.User.GetId()
	case *fugadv1.ComponentSpec_Pseudo:
		return s.Pseudo.GetId()
	}
	return ""
}

// build assembles the fluid and feed from the flags. With --fluid-file the
// file gives the fluid (a protojson Fluid) and --fluid the amounts of its
// components by id, in any order; without it the --fluid string gives the
// components, in its order, as data-bank ids. --model is required unless
// the file names a model; when both do, --model wins. volumeSet says
// whether --volume-translation was given (it then overrides the file).
func (f *fluidFlags) build(volumeSet bool) (*feed, error) {
	if f.fluid == "" {
		return nil, fmt.Errorf("--fluid is required (e.g. --fluid \"methane=87, ethane=5.2, propane=2.4\")")
	}
	am, err := parseAmounts(f.fluid)
	if err != nil {
		return nil, fmt.Errorf("--fluid: %w", err)
	}
	comp, err := toComposition(am, f.basis, f.normalise)
	if err != nil {
		return nil, fmt.Errorf("--fluid: %w", err)
	}
	fl := &fugadv1.Fluid{}
	if f.file != "" {
		b, err := os.ReadFile(f.file)
		if err != nil {
			return nil, fmt.Errorf("--fluid-file: %w", err)
		}
		if err := protojson.Unmarshal(b, fl); err != nil {
			return nil, fmt.Errorf("--fluid-file %s: not a protojson fugad.v1.Fluid: %w", f.file, err)
		}
		if len(fl.GetComponents()) == 0 {
			return nil, fmt.Errorf("--fluid-file %s: the fluid has no components", f.file)
		}
		// Reorder the amounts to the file's component order.
		byName := map[string]int{}
		for i, n := range comp.names {
			byName[strings.ToLower(n)] = i
		}
		names := make([]string, len(fl.GetComponents()))
		x := make([]float64, len(fl.GetComponents()))
		for i, c := range fl.GetComponents() {
			id := componentID(c)
			j, ok := byName[strings.ToLower(id)]
			if !ok {
				return nil, fmt.Errorf("--fluid: component %q of %s has no amount", id, f.file)
			}
			delete(byName, strings.ToLower(id))
			names[i], x[i] = id, comp.fractions[j]
		}
		for _, n := range comp.names {
			if _, left := byName[strings.ToLower(n)]; left {
				return nil, fmt.Errorf("--fluid: %q is not a component of %s", n, f.file)
			}
		}
		comp.names, comp.fractions = names, x
	} else {
		for _, n := range comp.names {
			fl.Components = append(fl.Components, &fugadv1.ComponentSpec{Source: &fugadv1.ComponentSpec_Id{Id: n}})
		}
	}
	if f.model != "" {
		m, err := parseModel(f.model)
		if err != nil {
			return nil, err
		}
		fl.Model = m
	}
	if fl.GetModel() == fugadv1.Model_MODEL_UNSPECIFIED {
		return nil, fmt.Errorf("--model is required: PR76, PR78 or SRK (see fugactl models)")
	}
	if volumeSet || f.file == "" {
		fl.VolumeTranslation = f.translation
	}
	return &feed{fluid: fl, comp: comp}, nil
}

// describe is a one-line description of the feed, for titles: the model
// and the largest components (at most max), in mole %.
func (fd *feed) describe(max int) string {
	type nx struct {
		n string
		x float64
	}
	var all []nx
	for i, n := range fd.comp.names {
		all = append(all, nx{n, fd.comp.fractions[i]})
	}
	// Stable selection of the largest amounts keeps the fluid's own order
	// among those shown.
	keep := map[int]bool{}
	for len(keep) < min(max, len(all)) {
		best := -1
		for i := range all {
			if !keep[i] && (best < 0 || all[i].x > all[best].x) {
				best = i
			}
		}
		keep[best] = true
	}
	var parts []string
	for i, a := range all {
		if keep[i] {
			parts = append(parts, fmt.Sprintf("%s %.4g%%", a.n, 100*a.x))
		}
	}
	s := modelName(fd.fluid.GetModel()) + ": " + strings.Join(parts, ", ")
	if len(all) > max {
		s += fmt.Sprintf(", … (%d components)", len(all))
	}
	return s
}
