package deploy

import (
	"fmt"
	"slices"
	"strings"
	"testing"

	"google.golang.org/grpc/codes"
)

// metricKind is the Prometheus type of a metric family.
type metricKind string

const (
	counter   metricKind = "counter"
	gauge     metricKind = "gauge"
	histogram metricKind = "histogram"
)

// exportedMetric describes one metric family the server exports: its type
// and the labels the server attaches (target labels come from the scrape).
type exportedMetric struct {
	Kind   metricKind
	Labels []string
}

// exportedMetrics are the families fugad exports on /metrics: the gRPC
// server metrics of go-grpc-middleware's Prometheus provider (with the
// handling-time histogram enabled) and the server's own solver and cache
// metrics. Alerts and dashboards may use these and nothing else.
var exportedMetrics = map[string]exportedMetric{
	"grpc_server_started_total":       {counter, []string{"grpc_type", "grpc_service", "grpc_method"}},
	"grpc_server_handled_total":       {counter, []string{"grpc_type", "grpc_service", "grpc_method", "grpc_code"}},
	"grpc_server_handling_seconds":    {histogram, []string{"grpc_type", "grpc_service", "grpc_method"}},
	"fugad_solver_iterations":         {histogram, []string{"stage"}},
	"fugad_solver_lnphi_evaluations":  {histogram, nil},
	"fugad_solve_duration_seconds":    {histogram, []string{"spec"}},
	"fugad_solver_nonconverged_total": {counter, []string{"reason"}},
	"fugad_phases_total":              {counter, []string{"phases"}},
	"fugad_shed_total":                {counter, []string{"method"}},
	"fugad_panics_total":              {counter, nil},
	"fugad_cache_hits_total":          {counter, nil},
	"fugad_cache_misses_total":        {counter, nil},
	"fugad_cache_evictions_total":     {counter, nil},
	"fugad_cache_collapsed_total":     {counter, nil},
	"fugad_cache_entries":             {gauge, nil},
	"fugad_cache_bytes":               {gauge, nil},
}

// scrapeJob is the job name of the scrape configuration in
// deploy/prometheus/prometheus.yml; it also produces the synthetic "up"
// series used by FugadTargetDown.
const scrapeJob = "fugad"

// targetLabels are attached to every series by the scrape job's relabelling.
var targetLabels = []string{"job", "instance", "namespace", "pod", "node", "container"}

// grpcServiceName and grpcMethods are the values the gRPC metrics carry in
// grpc_service and grpc_method (api/fugad/v1).
const grpcServiceName = "fugad.v1.FugadService"

var grpcMethods = []string{"Flash", "FlashBatch", "FlashStream", "PhaseEnvelope", "FugacityCoefficients", "SaturationPoint", "ListModels", "ListComponents"}

// seriesLabels returns the labels a series of the given name may carry, or
// false when the name is not exported: histogram families export _bucket
// (with le), _sum and _count.
func seriesLabels(name string) ([]string, bool) {
	if name == "up" {
		return targetLabels, true
	}
	if m, ok := exportedMetrics[name]; ok && m.Kind != histogram {
		return append(slices.Clone(m.Labels), targetLabels...), true
	}
	for _, suffix := range []string{"_bucket", "_sum", "_count"} {
		base, ok := strings.CutSuffix(name, suffix)
		if m, known := exportedMetrics[base]; ok && known && m.Kind == histogram {
			l := append(slices.Clone(m.Labels), targetLabels...)
			if suffix == "_bucket" {
				l = append(l, "le")
			}
			return l, true
		}
	}
	return nil, false
}

// promqlFunctions are the PromQL functions and aggregation operators the
// files may call; an unknown name (a typo) is an error rather than being
// read as a metric.
var promqlFunctions = []string{
	"sum", "avg", "min", "max", "count", "topk", "bottomk", "quantile",
	"rate", "irate", "increase", "delta", "histogram_quantile",
	"avg_over_time", "max_over_time", "min_over_time", "sum_over_time",
	"abs", "clamp_min", "clamp_max", "absent", "vector", "scalar", "time",
}

// promqlAggregators may be followed by a by/without clause before "(".
var promqlAggregators = []string{"sum", "avg", "min", "max", "count", "topk", "bottomk", "quantile"}

// labelMatcher is one matcher of a selector: label, operator, value.
type labelMatcher struct {
	Label, Op, Value string
}

// vectorSelector is a metric name with its label matchers.
type vectorSelector struct {
	Name     string
	Matchers []labelMatcher
}

// promqlRefs is what a PromQL expression refers to.
type promqlRefs struct {
	Selectors []vectorSelector
	Variables []string // Grafana variables such as $namespace
}

type promqlToken struct {
	kind byte // 'i' identifier, 's' string, 'n' number, 'v' variable, 'p' punctuation
	text string
}

// lexPromQL splits a PromQL expression (as written in rule files and
// Grafana panels) into tokens. Range and subquery brackets are dropped
// whole, since they hold durations only.
func lexPromQL(expr string) ([]promqlToken, error) {
	var toks []promqlToken
	isIdentStart := func(c byte) bool { return c == '_' || c == ':' || c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' }
	isIdent := func(c byte) bool { return isIdentStart(c) || c >= '0' && c <= '9' }
	for i := 0; i < len(expr); {
		c := expr[i]
		switch {
		case c == ' ' || c == '\t' || c == '\n' || c == '\r':
			i++
		case c == '#':
			for i < len(expr) && expr[i] != '\n' {
				i++
			}
		case c == '"' || c == '\'' || c == '`':
			var b strings.Builder
			j := i + 1
			for ; j < len(expr) && expr[j] != c; j++ {
				if expr[j] == '\\' && c != '`' && j+1 < len(expr) {
					j++
				}
				b.WriteByte(expr[j])
			}
			if j >= len(expr) {
				return nil, fmt.Errorf("unterminated string in %q", expr)
			}
			toks = append(toks, promqlToken{'s', b.String()})
			i = j + 1
		case c == '[':
			j := strings.IndexByte(expr[i:], ']')
			if j < 0 {
				return nil, fmt.Errorf("unterminated [ in %q", expr)
			}
			i += j + 1
		case c == '$':
			j := i + 1
			if j < len(expr) && expr[j] == '{' {
				k := strings.IndexByte(expr[j:], '}')
				if k < 0 {
					return nil, fmt.Errorf("unterminated ${ in %q", expr)
				}
				toks = append(toks, promqlToken{'v', expr[j+1 : j+k]})
				i = j + k + 1
				continue
			}
			for j < len(expr) && isIdent(expr[j]) {
				j++
			}
			toks = append(toks, promqlToken{'v', expr[i+1 : j]})
			i = j
		case c >= '0' && c <= '9' || c == '.' && i+1 < len(expr) && expr[i+1] >= '0' && expr[i+1] <= '9':
			j := i
			for j < len(expr) && (isIdent(expr[j]) || expr[j] == '.' ||
				(expr[j] == '+' || expr[j] == '-') && (expr[j-1] == 'e' || expr[j-1] == 'E')) {
				j++
			}
			toks = append(toks, promqlToken{'n', expr[i:j]})
			i = j
		case isIdentStart(c):
			j := i
			for j < len(expr) && isIdent(expr[j]) {
				j++
			}
			toks = append(toks, promqlToken{'i', expr[i:j]})
			i = j
		default:
			op := string(c)
			if i+1 < len(expr) && slices.Contains([]string{"==", "!=", "=~", "!~", ">=", "<="}, expr[i:i+2]) {
				op = expr[i : i+2]
			}
			if !strings.Contains("(){},=!~<>+-*/%^", op[:1]) {
				return nil, fmt.Errorf("unexpected %q in %q", c, expr)
			}
			toks = append(toks, promqlToken{'p', op})
			i += len(op)
		}
	}
	return toks, nil
}

// parsePromQLRefs finds the metric selectors and Grafana variables of a
// PromQL expression. It knows enough of the grammar to tell metric names
// from functions, keywords and label lists: by/without/on/ignoring/
// group_left/group_right lists, label matchers inside braces, numbers and
// strings. A selector without a metric name is refused, since the name
// check could not see it.
func parsePromQLRefs(expr string) (promqlRefs, error) {
	toks, err := lexPromQL(expr)
	if err != nil {
		return promqlRefs{}, err
	}
	var refs promqlRefs
	peek := func(i int) promqlToken {
		if i < len(toks) {
			return toks[i]
		}
		return promqlToken{}
	}
	skipList := func(i int) (int, error) { // i at "("; returns index after ")"
		for j := i + 1; j < len(toks); j++ {
			if toks[j].kind == 'p' && toks[j].text == ")" {
				return j + 1, nil
			}
			if toks[j].kind != 'i' && !(toks[j].kind == 'p' && toks[j].text == ",") {
				return 0, fmt.Errorf("unexpected %q in a label list of %q", toks[j].text, expr)
			}
		}
		return 0, fmt.Errorf("unterminated label list in %q", expr)
	}
	for i := 0; i < len(toks); {
		tk := toks[i]
		switch tk.kind {
		case 'v':
			refs.Variables = append(refs.Variables, tk.text)
			i++
		case 's', 'n':
			i++
		case 'p':
			if tk.text == "{" {
				return refs, fmt.Errorf("selector without a metric name in %q", expr)
			}
			i++
		case 'i':
			word := tk.text
			next := peek(i + 1)
			switch {
			case slices.Contains([]string{"by", "without", "on", "ignoring", "group_left", "group_right"}, word):
				if next.kind == 'p' && next.text == "(" {
					if i, err = skipList(i + 1); err != nil {
						return refs, err
					}
				} else if word != "group_left" && word != "group_right" {
					return refs, fmt.Errorf("%s without a label list in %q", word, expr)
				} else {
					i++
				}
			case slices.Contains([]string{"and", "or", "unless", "bool", "offset", "inf", "nan", "Inf", "NaN"}, word):
				i++
			case next.kind == 'p' && next.text == "(" ||
				slices.Contains(promqlAggregators, word) && next.kind == 'i' && (next.text == "by" || next.text == "without"):
				if !slices.Contains(promqlFunctions, word) {
					return refs, fmt.Errorf("unknown function %q in %q", word, expr)
				}
				i++
			default:
				sel := vectorSelector{Name: word}
				i++
				if next.kind == 'p' && next.text == "{" {
					i++
					for {
						if t := peek(i); t.kind == 'p' && t.text == "}" {
							i++
							break
						}
						l, op, v := peek(i), peek(i+1), peek(i+2)
						if l.kind != 'i' || op.kind != 'p' || !slices.Contains([]string{"=", "!=", "=~", "!~"}, op.text) || v.kind != 's' {
							return refs, fmt.Errorf("cannot read the label matchers of %s in %q", word, expr)
						}
						sel.Matchers = append(sel.Matchers, labelMatcher{l.text, op.text, v.text})
						for _, v := range variablesIn(v.text) {
							refs.Variables = append(refs.Variables, v)
						}
						i += 3
						if t := peek(i); t.kind == 'p' && t.text == "," {
							i++
						}
					}
				}
				refs.Selectors = append(refs.Selectors, sel)
			}
		}
	}
	return refs, nil
}

// variablesIn returns the Grafana variables ($name or ${name}) in a string.
func variablesIn(s string) []string {
	var vars []string
	for i := 0; i < len(s); i++ {
		if s[i] != '$' {
			continue
		}
		j := i + 1
		if j < len(s) && s[j] == '{' {
			if k := strings.IndexByte(s[j:], '}'); k > 0 {
				vars = append(vars, s[j+1:j+k])
				i = j + k
			}
			continue
		}
		for j < len(s) && (s[j] == '_' || s[j] >= 'a' && s[j] <= 'z' || s[j] >= 'A' && s[j] <= 'Z' || s[j] >= '0' && s[j] <= '9') {
			j++
		}
		if j > i+1 {
			vars = append(vars, s[i+1:j])
			i = j - 1
		}
	}
	return vars
}

// matcherValues returns the literal values a matcher names: the value
// itself for = and !=, the alternatives of a regular expression that is a
// plain a|b|c list for =~ and !~. ok is false for any other regular
// expression (such as a Grafana variable's .*), which cannot be checked.
func matcherValues(m labelMatcher) (vals []string, ok bool) {
	if m.Op == "=" || m.Op == "!=" {
		return []string{m.Value}, true
	}
	for _, alt := range strings.Split(m.Value, "|") {
		if alt == "" || strings.ContainsAny(alt, `.*+?()[]{}^$\`) {
			return nil, false
		}
		vals = append(vals, alt)
	}
	return vals, true
}

// checkPromQL checks that an expression uses only exported metrics, with
// labels those metrics carry, and that label values for the gRPC labels and
// the job name are ones the server and the scrape job produce.
func checkPromQL(expr string) (promqlRefs, error) {
	refs, err := parsePromQLRefs(expr)
	if err != nil {
		return refs, err
	}
	if len(refs.Selectors) == 0 {
		return refs, fmt.Errorf("no metric in %q", expr)
	}
	var codeNames []string
	for c := codes.OK; c <= codes.Unauthenticated; c++ {
		codeNames = append(codeNames, c.String())
	}
	allowed := map[string][]string{
		"grpc_code":    codeNames,
		"grpc_service": {grpcServiceName},
		"grpc_method":  grpcMethods,
		"grpc_type":    {"unary", "client_stream", "server_stream", "bidi_stream"},
		"job":          {scrapeJob},
	}
	var errs []string
	for _, sel := range refs.Selectors {
		lbls, ok := seriesLabels(sel.Name)
		if !ok {
			errs = append(errs, fmt.Sprintf("%s is not a metric fugad exports", sel.Name))
			continue
		}
		for _, m := range sel.Matchers {
			if !slices.Contains(lbls, m.Label) {
				errs = append(errs, fmt.Sprintf("%s has no label %s", sel.Name, m.Label))
				continue
			}
			want, restricted := allowed[m.Label]
			vals, literal := matcherValues(m)
			if !restricted || !literal {
				continue
			}
			for _, v := range vals {
				if !slices.Contains(want, v) {
					errs = append(errs, fmt.Sprintf("%s{%s%s%q}: %q is not one of %q", sel.Name, m.Label, m.Op, m.Value, v, want))
				}
			}
		}
	}
	if len(errs) > 0 {
		return refs, fmt.Errorf("%s: %s", strings.Join(errs, "; "), expr)
	}
	return refs, nil
}

func TestParsePromQLRefs(t *testing.T) {
	refs, err := parsePromQLRefs(`histogram_quantile(0.99, sum by (grpc_method, le) (rate(grpc_server_handling_seconds_bucket{job="fugad", grpc_method=~"Flash|FlashBatch"}[5m:1m] offset 1h))) > 0.25
		and on (namespace) group_left sum without (pod) (fugad_cache_entries{namespace=~"$namespace"}) / 1e-3 # comment fugad_not_a_metric
		unless absent(up{job="fugad"}) * ${scale}`)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, s := range refs.Selectors {
		names = append(names, s.Name)
	}
	if want := []string{"grpc_server_handling_seconds_bucket", "fugad_cache_entries", "up"}; !slices.Equal(names, want) {
		t.Errorf("metrics %q, want %q", names, want)
	}
	if want := []string{"namespace", "scale"}; !slices.Equal(refs.Variables, want) {
		t.Errorf("variables %q, want %q", refs.Variables, want)
	}
	if m := refs.Selectors[0].Matchers; len(m) != 2 || m[1] != (labelMatcher{"grpc_method", "=~", "Flash|FlashBatch"}) {
		t.Errorf("matchers %+v", m)
	}
	for _, bad := range []string{`{__name__="x"}`, `sum by grpc_code (x)`, `rat(x[5m])`, `x{a=~"b"`, `x{a b}`} {
		if _, err := parsePromQLRefs(bad); err == nil {
			t.Errorf("parsePromQLRefs(%q) succeeded", bad)
		}
	}
}

func TestCheckPromQLRejectsWhatTheServerDoesNotExport(t *testing.T) {
	for _, bad := range []string{
		`rate(fugad_solver_iterations_total[5m])`,                               // histogram, not a counter
		`fugad_cache_hits`,                                                      // missing _total
		`rate(fugad_shed_total{reason="x"}[5m])`,                                // label of another metric
		`rate(grpc_server_handled_total{grpc_code!~"OK|INVALID_ARGUMENT"}[5m])`, // code spelt as in the proto
		`rate(grpc_server_handled_total{grpc_service="fugad.FugadService"}[5m])`,
		`rate(grpc_server_started_total{grpc_method="Flsh"}[5m])`,
		`up{job="prometheus"}`,
		`fugad_cache_bytes_bucket`,
		`1 + 2`,
	} {
		if _, err := checkPromQL(bad); err == nil {
			t.Errorf("checkPromQL(%q) accepted it", bad)
		}
	}
	for _, good := range []string{
		`sum(rate(fugad_solver_iterations_bucket{stage=~"$stage", le="+Inf"}[5m]))`,
		`rate(grpc_server_handled_total{grpc_code!~"OK|InvalidArgument|NotFound", grpc_method=~".*"}[5m])`,
		`fugad_cache_bytes{pod="fugad-0"}`,
	} {
		if _, err := checkPromQL(good); err != nil {
			t.Errorf("checkPromQL(%q): %v", good, err)
		}
	}
}
