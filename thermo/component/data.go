package component

import (
	_ "embed"
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
)

// DataVersion names the edition of the embedded component and
// interaction-parameter tables. It changes whenever a value in either table
// changes; the data file carries the same string on its "version" line and
// a test ties the version to a digest of both files.
const DataVersion = "components-2026.2"

//go:embed data/components.txt
var componentsFile string

// ParseError reports a malformed line in an embedded data file.
type ParseError struct {
	File   string // data file name
	Line   int    // 1-based line number
	Field  string // column name, or "" for the line as a whole
	Reason string
}

// Error states file, line, field and reason.
func (e *ParseError) Error() string {
	if e.Field == "" {
		return fmt.Sprintf("component: %s:%d: %s", e.File, e.Line, e.Reason)
	}
	return fmt.Sprintf("component: %s:%d: field %s: %s", e.File, e.Line, e.Field, e.Reason)
}

// Units of the data file columns and their factors to SI.
const (
	fileUnits = "M=g/mol Tc=K Pc=bar Vc=cm3/mol Tb=K Hf=kJ/mol Cp=Cp/R,T=K"
	gPerKg    = 1e3
	paPerBar  = 1e5
	m3PerCm3  = 1e-6
	jPerKJ    = 1e3
)

var constantColumns = []string{
	"id", "name", "formula", "CAS", "aliases", "family", "M", "Tc", "Pc", "omega",
	"Vc", "ZRA", "Tb", "SG", "Hf", "source", "flag",
}

var cpColumns = []string{
	"id", "Tmin", "Tmax", "a0", "a1", "a2", "a3", "a4", "source", "flag",
}

// table is the parsed content of the component data file.
type table struct {
	version string
	comps   []Component
}

// lineScanner walks a data file line by line, skipping comments and blank
// lines.
type lineScanner struct {
	file  string
	lines []string
	n     int
}

func newLineScanner(file, text string) *lineScanner {
	return &lineScanner{file: file, lines: strings.Split(text, "\n")}
}

// next returns the next meaningful line and its 1-based number.
func (s *lineScanner) next() (string, int, bool) {
	for s.n < len(s.lines) {
		l := strings.TrimSpace(strings.TrimSuffix(s.lines[s.n], "\r"))
		s.n++
		if l == "" || strings.HasPrefix(l, "#") {
			continue
		}
		return l, s.n, true
	}
	return "", 0, false
}

func (s *lineScanner) errf(line int, field, format string, args ...any) error {
	return &ParseError{File: s.file, Line: line, Field: field, Reason: fmt.Sprintf(format, args...)}
}

// splitFields splits a row at '|' and trims each field.
func splitFields(l string) []string {
	f := strings.Split(l, "|")
	for i := range f {
		f[i] = strings.TrimSpace(f[i])
	}
	return f
}

// parseSourceLine reads "source KEY | text" into srcs.
func parseSourceLine(s *lineScanner, ln int, l string, srcs map[string]string) error {
	rest := strings.TrimSpace(strings.TrimPrefix(l, "source"))
	key, text, ok := strings.Cut(rest, "|")
	key, text = strings.TrimSpace(key), strings.TrimSpace(text)
	if !ok || key == "" || text == "" || strings.ContainsAny(key, " +") {
		return s.errf(ln, "source", "want \"source KEY | citation\" with a key without blanks or '+'")
	}
	if _, dup := srcs[key]; dup {
		return s.errf(ln, "source", "key %q defined twice", key)
	}
	srcs[key] = text
	return nil
}

// resolveSources turns "K1+K2" into the joined citations.
func resolveSources(s *lineScanner, ln int, field, keys string, srcs map[string]string) (string, error) {
	if keys == "" {
		return "", s.errf(ln, field, "empty source")
	}
	var parts []string
	for _, k := range strings.Split(keys, "+") {
		t, ok := srcs[strings.TrimSpace(k)]
		if !ok {
			return "", s.errf(ln, field, "unknown source key %q", k)
		}
		parts = append(parts, t)
	}
	return strings.Join(parts, "; "), nil
}

func parseFlag(s *lineScanner, ln int, v string) (bool, error) {
	switch v {
	case "recalled":
		return true, nil
	case "read":
		return false, nil
	}
	return false, s.errf(ln, "flag", "want \"recalled\" or \"read\", got %q", v)
}

// parseNumber parses a finite number; optional columns accept "-" as 0.
func parseNumber(s *lineScanner, ln int, field, v string, optional bool) (float64, error) {
	if v == "-" {
		if optional {
			return 0, nil
		}
		return 0, s.errf(ln, field, "value required")
	}
	x, err := strconv.ParseFloat(v, 64)
	if err != nil {
		return 0, s.errf(ln, field, "not a number: %q", v)
	}
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0, s.errf(ln, field, "must be finite, got %q", v)
	}
	return x, nil
}

// checkRange enforces lo ≤ x ≤ hi on a parsed value (optional zero allowed).
func checkRange(s *lineScanner, ln int, field string, x, lo, hi float64, zeroOK bool) error {
	if zeroOK && x == 0 {
		return nil
	}
	if x < lo || x > hi {
		return s.errf(ln, field, "%g outside the plausible range [%g, %g]", x, lo, hi)
	}
	return nil
}

// validID reports whether id is a canonical identifier: lower case, no
// surrounding blanks, no separator characters.
func validID(id string) bool {
	if id == "" || len(id) > 64 || id != strings.TrimSpace(id) || id != strings.ToLower(id) {
		return false
	}
	return !strings.ContainsAny(id, "|#; \t")
}

// parseComponents reads the component data file format described in doc.go.
func parseComponents(file, text string) (*table, error) {
	s := newLineScanner(file, text)
	t := &table{}
	srcs := map[string]string{}
	byID := map[string]int{}
	cpSeen := map[string]bool{}
	section := ""
	unitsSeen := false
	for {
		l, ln, ok := s.next()
		if !ok {
			break
		}
		switch {
		case strings.HasPrefix(l, "version "):
			if t.version != "" {
				return nil, s.errf(ln, "version", "version given twice")
			}
			t.version = strings.TrimSpace(strings.TrimPrefix(l, "version "))
			continue
		case strings.HasPrefix(l, "source "):
			if err := parseSourceLine(s, ln, l, srcs); err != nil {
				return nil, err
			}
			continue
		case strings.HasPrefix(l, "units "):
			if u := strings.Join(strings.Fields(strings.TrimPrefix(l, "units ")), " "); u != fileUnits {
				return nil, s.errf(ln, "units", "file units %q differ from the units the parser converts (%q)", u, fileUnits)
			}
			unitsSeen = true
			continue
		case strings.HasPrefix(l, "section "):
			sec := strings.TrimSpace(strings.TrimPrefix(l, "section "))
			if sec != "constants" && sec != "cp" {
				return nil, s.errf(ln, "section", "unknown section %q", sec)
			}
			if !unitsSeen {
				return nil, s.errf(ln, "units", "a units line must precede the tables")
			}
			section = sec
			continue
		}
		f := splitFields(l)
		switch section {
		case "constants":
			c, err := parseConstantsRow(s, ln, f, srcs)
			if err != nil {
				return nil, err
			}
			if _, dup := byID[c.ID]; dup {
				return nil, s.errf(ln, "id", "component %q listed twice", c.ID)
			}
			byID[c.ID] = len(t.comps)
			t.comps = append(t.comps, c)
		case "cp":
			if len(f) != len(cpColumns) {
				return nil, s.errf(ln, "", "cp row has %d fields, want %d (%s)", len(f), len(cpColumns), strings.Join(cpColumns, " | "))
			}
			i, known := byID[f[0]]
			if !known {
				return nil, s.errf(ln, "id", "cp row for %q, which has no constants row above", f[0])
			}
			if cpSeen[f[0]] {
				return nil, s.errf(ln, "id", "second cp row for %q", f[0])
			}
			cpSeen[f[0]] = true
			if err := parseCpRow(s, ln, f, srcs, &t.comps[i]); err != nil {
				return nil, err
			}
		default:
			return nil, s.errf(ln, "", "row outside a section (want \"section constants\" or \"section cp\" first)")
		}
	}
	if t.version == "" {
		return nil, &ParseError{File: file, Line: 1, Field: "version", Reason: "no version line"}
	}
	if len(t.comps) == 0 {
		return nil, &ParseError{File: file, Line: s.n, Reason: "no components"}
	}
	for _, c := range t.comps {
		if !cpSeen[c.ID] {
			return nil, &ParseError{File: file, Line: s.n, Field: "cp", Reason: fmt.Sprintf("no cp row for %q", c.ID)}
		}
	}
	sort.Slice(t.comps, func(i, j int) bool { return t.comps[i].ID < t.comps[j].ID })
	return t, nil
}

func parseConstantsRow(s *lineScanner, ln int, f []string, srcs map[string]string) (Component, error) {
	var c Component
	if len(f) != len(constantColumns) {
		return c, s.errf(ln, "", "constants row has %d fields, want %d (%s)", len(f), len(constantColumns), strings.Join(constantColumns, " | "))
	}
	if !validID(f[0]) {
		return c, s.errf(ln, "id", "%q is not a lower-case identifier without blanks", f[0])
	}
	c.ID = f[0]
	if f[1] == "" || f[1] == "-" {
		return c, s.errf(ln, "name", "display name required")
	}
	c.Name = f[1]
	if f[2] == "" || f[2] == "-" {
		return c, s.errf(ln, "formula", "formula required")
	}
	if _, err := parseFormula(f[2]); err != nil {
		return c, s.errf(ln, "formula", "%v", err)
	}
	c.Formula = f[2]
	if !validCAS(f[3]) {
		return c, s.errf(ln, "CAS", "%q is not a CAS registry number with a valid check digit", f[3])
	}
	c.CAS = f[3]
	if f[4] != "-" {
		for _, a := range strings.Split(f[4], ";") {
			a = strings.TrimSpace(a)
			if a == "" || strings.ContainsAny(a, "|#") {
				return c, s.errf(ln, "aliases", "empty or malformed alias in %q", f[4])
			}
			c.Aliases = append(c.Aliases, a)
		}
	}
	fam, ok := ParseFamily(f[5])
	if !ok || fam == FamilyPseudo {
		return c, s.errf(ln, "family", "unknown family %q", f[5])
	}
	c.Family = fam
	type col struct {
		name     string
		dst      *float64
		scale    float64
		lo, hi   float64
		optional bool
	}
	cols := []col{
		{"M", &c.MolarMass, 1 / gPerKg, 1, 1000, false},
		{"Tc", &c.Tc, 1, 2, 1500, false},
		{"Pc", &c.Pc, paPerBar, 1, 500, false},
		{"omega", &c.Omega, 1, -0.5, 2, false},
		{"Vc", &c.Vc, m3PerCm3, 10, 5000, true},
		{"ZRA", &c.ZRA, 1, 0.15, 0.35, true},
		{"Tb", &c.Tb, 1, 1, 1500, false},
		{"SG", &c.SG, 1, 0.3, 2, true},
		{"Hf", &c.Hf, jPerKJ, -2000, 2000, false},
	}
	for i, cl := range cols {
		x, err := parseNumber(s, ln, cl.name, f[6+i], cl.optional)
		if err != nil {
			return c, err
		}
		if err := checkRange(s, ln, cl.name, x, cl.lo, cl.hi, cl.optional); err != nil {
			return c, err
		}
		*cl.dst = x * cl.scale
	}
	if c.Tb >= c.Tc {
		return c, s.errf(ln, "Tb", "normal boiling point %g K not below Tc %g K", c.Tb, c.Tc)
	}
	src, err := resolveSources(s, ln, "source", f[15], srcs)
	if err != nil {
		return c, err
	}
	c.Source = src
	rec, err := parseFlag(s, ln, f[16])
	if err != nil {
		return c, err
	}
	c.Recalled = rec
	return c, nil
}

func parseCpRow(s *lineScanner, ln int, f []string, srcs map[string]string, c *Component) error {
	var cp IdealGasCp
	var err error
	if cp.Tmin, err = parseNumber(s, ln, "Tmin", f[1], false); err != nil {
		return err
	}
	if cp.Tmax, err = parseNumber(s, ln, "Tmax", f[2], false); err != nil {
		return err
	}
	if cp.Tmin <= 0 || cp.Tmax <= cp.Tmin {
		return s.errf(ln, "Tmax", "want 0 < Tmin < Tmax, got %g..%g", cp.Tmin, cp.Tmax)
	}
	for k := range cp.A {
		if cp.A[k], err = parseNumber(s, ln, cpColumns[3+k], f[3+k], false); err != nil {
			return err
		}
	}
	if err := checkCpPositive(&cp); err != nil {
		return s.errf(ln, "a0", "%v", err)
	}
	src, err := resolveSources(s, ln, "source", f[8], srcs)
	if err != nil {
		return err
	}
	rec, err := parseFlag(s, ln, f[9])
	if err != nil {
		return err
	}
	c.Cp = cp
	c.CpSource = src
	c.Recalled = c.Recalled || rec
	return nil
}

// checkCpPositive samples the polynomial on a fine grid over its range and
// rejects it if Cp/R drops below 3/2 (below the translational part alone)
// anywhere.
func checkCpPositive(cp *IdealGasCp) error {
	const n = 200
	for i := 0; i <= n; i++ {
		T := cp.Tmin + (cp.Tmax-cp.Tmin)*float64(i)/n
		if v := cp.Cp(T) / R; !(v >= 1.5) || math.IsInf(v, 0) {
			return fmt.Errorf("Cp/R = %.4g at %g K, below the ideal-gas minimum 3/2", v, T)
		}
	}
	return nil
}

// validCAS checks the form NNNNNNN-NN-N and the registry's check digit:
// the last digit equals Σ i·d_i mod 10 over the other digits, counted from
// the right starting at i = 1.
func validCAS(s string) bool {
	p := strings.Split(s, "-")
	if len(p) != 3 || len(p[0]) < 2 || len(p[0]) > 7 || len(p[1]) != 2 || len(p[2]) != 1 {
		return false
	}
	digits := p[0] + p[1]
	sum := 0
	for i := range len(digits) {
		d := digits[len(digits)-1-i]
		if d < '0' || d > '9' {
			return false
		}
		sum += (i + 1) * int(d-'0')
	}
	c := p[2][0]
	return c >= '0' && c <= '9' && sum%10 == int(c-'0')
}

// parseFormula reads a Hill-style formula such as "C2H6O2" into element
// counts.
func parseFormula(f string) (map[string]int, error) {
	out := map[string]int{}
	i := 0
	for i < len(f) {
		if f[i] < 'A' || f[i] > 'Z' {
			return nil, fmt.Errorf("formula %q: element symbol expected at offset %d", f, i)
		}
		j := i + 1
		for j < len(f) && f[j] >= 'a' && f[j] <= 'z' {
			j++
		}
		el := f[i:j]
		k := j
		for k < len(f) && f[k] >= '0' && f[k] <= '9' {
			k++
		}
		n := 1
		if k > j {
			v, err := strconv.Atoi(f[j:k])
			if err != nil || v == 0 {
				return nil, fmt.Errorf("formula %q: bad count for %s", f, el)
			}
			n = v
		}
		out[el] += n
		i = k
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("empty formula")
	}
	return out, nil
}
