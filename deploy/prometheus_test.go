package deploy

import (
	"bytes"
	"context"
	"maps"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"

	"sigs.k8s.io/yaml"
)

// ruleFile is the part of a Prometheus rule file the checks read; decoding
// is strict, so a misspelt field fails.
type ruleFile struct {
	Groups []struct {
		Name     string `json:"name"`
		Interval string `json:"interval,omitempty"`
		Rules    []struct {
			Alert         string            `json:"alert,omitempty"`
			Record        string            `json:"record,omitempty"`
			Expr          string            `json:"expr"`
			For           string            `json:"for,omitempty"`
			KeepFiringFor string            `json:"keep_firing_for,omitempty"`
			Labels        map[string]string `json:"labels,omitempty"`
			Annotations   map[string]string `json:"annotations,omitempty"`
		} `json:"rules"`
	} `json:"groups"`
}

func promDir(t testing.TB) string { return filepath.Join(repoRoot(t), "deploy", "prometheus") }

func loadRules(t testing.TB) *ruleFile {
	t.Helper()
	src, err := os.ReadFile(filepath.Join(promDir(t), "fugad-rules.yml"))
	if err != nil {
		t.Fatal(err)
	}
	var rf ruleFile
	if err := yaml.UnmarshalStrict(src, &rf); err != nil {
		t.Fatalf("fugad-rules.yml: %v", err)
	}
	return &rf
}

// alertsWithoutFor may fire on their first evaluation: each counts a
// discrete defect, where waiting adds nothing.
var alertsWithoutFor = []string{"FugadPanics"}

func TestAlertRules(t *testing.T) {
	rf := loadRules(t)
	seen := map[string]bool{}
	for _, g := range rf.Groups {
		for _, r := range g.Rules {
			if r.Record != "" || r.Alert == "" {
				t.Errorf("group %s: rule %q is not an alert; recording rules would add series the name check does not know", g.Name, r.Record)
				continue
			}
			if _, err := checkPromQL(r.Expr); err != nil {
				t.Errorf("%s: %v", r.Alert, err)
			}
			sev := r.Labels["severity"]
			if !slices.Contains([]string{"critical", "warning", "info"}, sev) {
				t.Errorf("%s: severity %q, want critical, warning or info", r.Alert, sev)
			}
			if key := r.Alert + "/" + sev; seen[key] {
				t.Errorf("%s: two rules with severity %s", r.Alert, sev)
			} else {
				seen[key] = true
			}
			if r.Annotations["summary"] == "" || r.Annotations["description"] == "" {
				t.Errorf("%s: summary and description annotations are required", r.Alert)
			}
			switch {
			case r.For == "" && slices.Contains(alertsWithoutFor, r.Alert):
			case r.For == "":
				t.Errorf("%s: no for: duration; one bad scrape would page", r.Alert)
			default:
				d, err := time.ParseDuration(r.For)
				if err != nil || d < 5*time.Minute || d > time.Hour {
					t.Errorf("%s: for: %s, want between 5m and 1h (%v)", r.Alert, r.For, err)
				}
			}
		}
	}
	for _, want := range []string{
		"FugadSolverNonConvergence", "FugadGRPCErrorRateHigh", "FugadLatencyP99High",
		"FugadLoadShedding", "FugadCacheHitRatioCollapsed",
	} {
		if !seen[want+"/warning"] && !seen[want+"/critical"] {
			t.Errorf("alert %s missing", want)
		}
	}
}

// TestErrorRateAlertExcludesCallerMistakes checks that the numerator of the
// error-rate alerts leaves out exactly the codes that report bad requests.
func TestErrorRateAlertExcludesCallerMistakes(t *testing.T) {
	found := 0
	for _, g := range loadRules(t).Groups {
		for _, r := range g.Rules {
			if r.Alert != "FugadGRPCErrorRateHigh" {
				continue
			}
			refs, err := checkPromQL(r.Expr)
			if err != nil {
				t.Fatal(err)
			}
			excluded := false
			for _, s := range refs.Selectors {
				for _, m := range s.Matchers {
					if m.Label == "grpc_code" && m.Op == "!~" {
						vals, _ := matcherValues(m)
						slices.Sort(vals)
						excluded = slices.Equal(vals, []string{"InvalidArgument", "NotFound", "OK"})
					}
				}
			}
			if !excluded {
				t.Errorf("%s (%s): numerator must match grpc_code!~\"OK|InvalidArgument|NotFound\"", r.Alert, r.Labels["severity"])
			}
			found++
		}
	}
	if found == 0 {
		t.Fatal("no FugadGRPCErrorRateHigh rule")
	}
}

// promtool returns the promtool to run: $PROMTOOL, or promtool on PATH.
// Without one the test fails under CI and is skipped elsewhere.
func promtool(t *testing.T) string {
	t.Helper()
	if p := os.Getenv("PROMTOOL"); p != "" {
		return p
	}
	p, err := exec.LookPath("promtool")
	if err != nil {
		if os.Getenv("CI") != "" {
			t.Fatal("promtool not found on PATH (and $PROMTOOL unset); CI must install it, e.g. apt-get install -y prometheus")
		}
		t.Skip("promtool not found on PATH; install the Debian package prometheus or set $PROMTOOL")
	}
	return p
}

func runPromtool(t *testing.T, args ...string) (string, error) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, promtool(t), args...)
	cmd.Dir = promDir(t)
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	err := cmd.Run()
	return out.String(), err
}

func TestPromtoolCheckRules(t *testing.T) {
	if out, err := runPromtool(t, "check", "rules", "fugad-rules.yml"); err != nil {
		t.Fatalf("promtool check rules: %v\n%s", err, out)
	}
}

// TestPromtoolTestRules runs the alert unit tests in fugad-rules.test.yml:
// synthetic series for which each alert must, or must not, fire.
func TestPromtoolTestRules(t *testing.T) {
	if out, err := runPromtool(t, "test", "rules", "fugad-rules.test.yml"); err != nil {
		t.Fatalf("promtool test rules: %v\n%s", err, out)
	}
}

func TestPromtoolCheckConfig(t *testing.T) {
	out, err := runPromtool(t, "check", "config", "prometheus.yml")
	if err != nil && strings.Contains(out, "field kubernetes_sd_configs not found") {
		// Debian's prometheus package is built without Kubernetes service
		// discovery, so its promtool cannot read this configuration.
		msg := "this promtool has no Kubernetes service discovery; set $PROMTOOL to one built from github.com/prometheus/prometheus/cmd/promtool"
		if os.Getenv("CI") != "" {
			t.Fatal(msg)
		}
		t.Skip(msg)
	}
	if err != nil {
		t.Fatalf("promtool check config: %v\n%s", err, out)
	}
}

// scrapeConfig is the part of prometheus.yml the cross-checks read.
type scrapeConfig struct {
	RuleFiles     []string `json:"rule_files"`
	ScrapeConfigs []struct {
		JobName             string `json:"job_name"`
		MetricsPath         string `json:"metrics_path"`
		KubernetesSDConfigs []struct {
			Role string `json:"role"`
		} `json:"kubernetes_sd_configs"`
		RelabelConfigs []struct {
			SourceLabels []string `json:"source_labels"`
			Action       string   `json:"action"`
			Regex        string   `json:"regex"`
			TargetLabel  string   `json:"target_label"`
		} `json:"relabel_configs"`
	} `json:"scrape_configs"`
}

// TestScrapeConfigKeepsFugadPods checks the scrape job against the
// Deployment: the keep rules must select its pods and its metrics port, and
// the job must be the one the rules and dashboard filter on.
func TestScrapeConfigKeepsFugadPods(t *testing.T) {
	src, err := os.ReadFile(filepath.Join(promDir(t), "prometheus.yml"))
	if err != nil {
		t.Fatal(err)
	}
	var cfg scrapeConfig
	if err := yaml.Unmarshal(src, &cfg); err != nil {
		t.Fatal(err)
	}
	for _, f := range cfg.RuleFiles {
		if _, err := os.Stat(filepath.Join(promDir(t), f)); err != nil {
			t.Errorf("rule_files: %v", err)
		}
	}
	d := one(t, "Deployment", loadManifests(t).Deployments)
	c := fugadContainer(t, d)
	var portName string
	for _, p := range c.Ports {
		if p.ContainerPort == metricsPort {
			portName = p.Name
		}
	}
	// __meta_kubernetes_pod_label_<name> with the label name sanitised as
	// Prometheus does: every character outside [a-zA-Z0-9_] becomes "_".
	sanitize := regexp.MustCompile(`[^a-zA-Z0-9_]`)
	pod := map[string]string{
		"__meta_kubernetes_pod_container_port_name":   portName,
		"__meta_kubernetes_pod_container_port_number": "9464",
		"__meta_kubernetes_pod_phase":                 "Running",
		"__meta_kubernetes_namespace":                 "plant",
	}
	for k, v := range d.Spec.Template.Labels {
		pod["__meta_kubernetes_pod_label_"+sanitize.ReplaceAllString(k, "_")] = v
	}
	other := map[string]string{"__meta_kubernetes_pod_container_port_name": "http", "__meta_kubernetes_pod_phase": "Running"}
	for k, v := range pod {
		if strings.HasPrefix(k, "__meta_kubernetes_pod_label_") {
			other[k] = v
		}
	}

	jobs := 0
	for _, sc := range cfg.ScrapeConfigs {
		if sc.JobName != scrapeJob {
			continue
		}
		jobs++
		if sc.MetricsPath != d.Spec.Template.Annotations["prometheus.io/path"] {
			t.Errorf("metrics_path %q differs from the pod annotation", sc.MetricsPath)
		}
		if len(sc.KubernetesSDConfigs) != 1 || sc.KubernetesSDConfigs[0].Role != "pod" {
			t.Errorf("want kubernetes_sd_configs with role pod, got %+v", sc.KubernetesSDConfigs)
		}
		// Apply the keep and drop rules as Prometheus does: the source
		// label values joined by ";" must fully match the regular expression.
		kept := func(target map[string]string) bool {
			for _, rc := range sc.RelabelConfigs {
				if rc.Action != "keep" && rc.Action != "drop" {
					continue
				}
				var vals []string
				for _, l := range rc.SourceLabels {
					vals = append(vals, target[l])
				}
				re := regexp.MustCompile("^(?:" + rc.Regex + ")$")
				if re.MatchString(strings.Join(vals, ";")) != (rc.Action == "keep") {
					return false
				}
			}
			return true
		}
		if !kept(pod) {
			t.Error("the scrape job drops the fugad pod's metrics port")
		}
		if kept(other) {
			t.Error("the scrape job keeps a port of the fugad pod other than metrics")
		}
		unrelated := maps.Clone(pod)
		for k := range unrelated {
			if strings.HasPrefix(k, "__meta_kubernetes_pod_label_") {
				unrelated[k] = "other-app"
			}
		}
		if kept(unrelated) {
			t.Error("the scrape job keeps pods that are not fugad")
		}
		targets := map[string]bool{}
		for _, rc := range sc.RelabelConfigs {
			targets[rc.TargetLabel] = true
		}
		for _, l := range []string{"namespace", "pod"} {
			if !targets[l] {
				t.Errorf("the scrape job does not set the %s label the alerts group by", l)
			}
		}
	}
	if jobs != 1 {
		t.Errorf("want one scrape job named %q, found %d", scrapeJob, jobs)
	}
}
