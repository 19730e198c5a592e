package deploy

import (
	"errors"
	"fmt"
	"net"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	appsv1 "k8s.io/api/apps/v1"
	autoscalingv2 "k8s.io/api/autoscaling/v2"
	corev1 "k8s.io/api/core/v1"
	policyv1 "k8s.io/api/policy/v1"
	metav1 "k8s.io/apimachinery/pkg/apis/meta/v1"
	"k8s.io/apimachinery/pkg/labels"
	"k8s.io/apimachinery/pkg/util/intstr"
	kjson "sigs.k8s.io/json"
	"sigs.k8s.io/yaml"
)

// Health service names the server registers with grpc.health.v1 (server
// package); the probes must ask for exactly these.
const (
	readinessService = "readiness"
	livenessService  = "liveness"
)

// manifests holds every object in deploy/kubernetes, decoded strictly.
type manifests struct {
	Deployments     []*appsv1.Deployment
	Services        []*corev1.Service
	ServiceAccounts []*corev1.ServiceAccount
	HPAs            []*autoscalingv2.HorizontalPodAutoscaler
	PDBs            []*policyv1.PodDisruptionBudget
}

// splitYAMLDocuments splits a multi-document YAML stream at "---" lines and
// drops documents that hold only comments or blank lines.
func splitYAMLDocuments(src string) []string {
	var docs []string
	var cur strings.Builder
	keep := func() {
		doc := cur.String()
		cur.Reset()
		for _, l := range strings.Split(doc, "\n") {
			if t := strings.TrimSpace(l); t != "" && !strings.HasPrefix(t, "#") {
				docs = append(docs, doc)
				return
			}
		}
	}
	for _, l := range strings.Split(src, "\n") {
		if strings.TrimRight(l, " \t") == "---" || strings.HasPrefix(l, "--- ") {
			keep()
			continue
		}
		cur.WriteString(l)
		cur.WriteString("\n")
	}
	keep()
	return docs
}

// decodeManifest decodes one YAML document into the Kubernetes type named by
// its apiVersion and kind, the way the API server does with strict field
// validation: field names match case-sensitively, and unknown or duplicate
// fields are errors.
func decodeManifest(doc string, m *manifests) error {
	data, err := yaml.YAMLToJSONStrict([]byte(doc))
	if err != nil {
		return err
	}
	var tm metav1.TypeMeta
	if err := kjson.UnmarshalCaseSensitivePreserveInts(data, &tm); err != nil {
		return err
	}
	strict := func(v any) error {
		strictErrs, err := kjson.UnmarshalStrict(data, v, kjson.DisallowDuplicateFields, kjson.DisallowUnknownFields)
		if err != nil {
			return err
		}
		return errors.Join(strictErrs...)
	}
	switch tm.APIVersion + " " + tm.Kind {
	case "apps/v1 Deployment":
		v := new(appsv1.Deployment)
		m.Deployments = append(m.Deployments, v)
		return strict(v)
	case "v1 Service":
		v := new(corev1.Service)
		m.Services = append(m.Services, v)
		return strict(v)
	case "v1 ServiceAccount":
		v := new(corev1.ServiceAccount)
		m.ServiceAccounts = append(m.ServiceAccounts, v)
		return strict(v)
	case "autoscaling/v2 HorizontalPodAutoscaler":
		v := new(autoscalingv2.HorizontalPodAutoscaler)
		m.HPAs = append(m.HPAs, v)
		return strict(v)
	case "policy/v1 PodDisruptionBudget":
		v := new(policyv1.PodDisruptionBudget)
		m.PDBs = append(m.PDBs, v)
		return strict(v)
	}
	return fmt.Errorf("unexpected object %s %s", tm.APIVersion, tm.Kind)
}

func loadManifests(t testing.TB) *manifests {
	t.Helper()
	files, err := filepath.Glob(filepath.Join(repoRoot(t), "deploy", "kubernetes", "*.yaml"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no manifests in deploy/kubernetes (%v)", err)
	}
	m := new(manifests)
	for _, f := range files {
		src, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		for i, doc := range splitYAMLDocuments(string(src)) {
			if err := decodeManifest(doc, m); err != nil {
				t.Fatalf("%s document %d: %v", filepath.Base(f), i+1, err)
			}
		}
	}
	return m
}

// one returns the single object of a kind, failing when there is not exactly one.
func one[T any](t testing.TB, kind string, objs []T) T {
	t.Helper()
	if len(objs) != 1 {
		t.Fatalf("want exactly one %s in deploy/kubernetes, found %d", kind, len(objs))
	}
	return objs[0]
}

// fugadContainer returns the Deployment's fugad container.
func fugadContainer(t testing.TB, d *appsv1.Deployment) *corev1.Container {
	t.Helper()
	for i := range d.Spec.Template.Spec.Containers {
		if c := &d.Spec.Template.Spec.Containers[i]; c.Name == "fugad" {
			return c
		}
	}
	t.Fatal("Deployment has no container named fugad")
	return nil
}

// containerArg returns the value of --name=value (or --name value) in args.
func containerArg(args []string, name string) (string, bool) {
	for i, a := range args {
		if v, ok := strings.CutPrefix(a, "--"+name+"="); ok {
			return v, true
		}
		if a == "--"+name && i+1 < len(args) {
			return args[i+1], true
		}
	}
	return "", false
}

func containerPort(t testing.TB, c *corev1.Container, name string) int32 {
	t.Helper()
	for _, p := range c.Ports {
		if p.Name == name {
			return p.ContainerPort
		}
	}
	t.Fatalf("container %s declares no port named %q", c.Name, name)
	return 0
}

func TestDecodeManifestIsStrict(t *testing.T) {
	for name, doc := range map[string]string{
		"unknown field":   "apiVersion: v1\nkind: Service\nmetadata:\n  name: x\nspec:\n  clusterAddress: None\n",
		"field case":      "apiVersion: v1\nkind: Service\nmetadata:\n  name: x\nspec:\n  clusterIp: None\n",
		"duplicate field": "apiVersion: v1\nkind: Service\nmetadata:\n  name: x\n  name: y\n",
		"unknown kind":    "apiVersion: v1\nkind: Servic\nmetadata:\n  name: x\n",
		"wrong type":      "apiVersion: policy/v1\nkind: PodDisruptionBudget\nspec:\n  selector: app\n",
	} {
		if err := decodeManifest(doc, new(manifests)); err == nil {
			t.Errorf("%s: decoded without error", name)
		}
	}
	if got := splitYAMLDocuments("# only a comment\n---\na: 1\n---\n\n--- \nb: 2\n"); len(got) != 2 {
		t.Errorf("splitYAMLDocuments found %d documents, want 2: %q", len(got), got)
	}
}

func TestManifestsDecode(t *testing.T) {
	m := loadManifests(t)
	one(t, "Deployment", m.Deployments)
	one(t, "ServiceAccount", m.ServiceAccounts)
	one(t, "HorizontalPodAutoscaler", m.HPAs)
	one(t, "PodDisruptionBudget", m.PDBs)
	if len(m.Services) != 2 {
		t.Fatalf("want a ClusterIP and a headless Service, found %d Services", len(m.Services))
	}
}

func TestDeploymentPortsAndProbes(t *testing.T) {
	m := loadManifests(t)
	d := one(t, "Deployment", m.Deployments)
	c := fugadContainer(t, d)
	if d.Spec.Replicas == nil || *d.Spec.Replicas != 3 {
		t.Errorf("replicas = %v, want 3", d.Spec.Replicas)
	}
	grpc := containerPort(t, c, "grpc")
	metrics := containerPort(t, c, "metrics")
	if grpc != grpcPort || metrics != metricsPort {
		t.Errorf("container ports grpc=%d metrics=%d, want %d and %d", grpc, metrics, grpcPort, metricsPort)
	}
	exposed := exposedPorts(loadDockerfile(t))
	for _, p := range c.Ports {
		if !slices.Contains(exposed, fmt.Sprintf("%d/%s", p.ContainerPort, strings.ToLower(string(p.Protocol)))) {
			t.Errorf("container port %s %d/%s is not EXPOSEd by the Dockerfile (%v)", p.Name, p.ContainerPort, p.Protocol, exposed)
		}
	}
	// The server must listen where the container port says it does.
	for flag, want := range map[string]int32{"grpc-addr": grpc, "metrics-addr": metrics} {
		v, ok := containerArg(c.Args, flag)
		if !ok {
			continue // the server default, checked by the constants above
		}
		_, port, err := net.SplitHostPort(v)
		if err != nil || port != strconv.Itoa(int(want)) {
			t.Errorf("--%s=%s does not listen on container port %d", flag, v, want)
		}
	}
	annotations := d.Spec.Template.Annotations
	if annotations["prometheus.io/scrape"] != "true" || annotations["prometheus.io/port"] != strconv.Itoa(int(metrics)) || annotations["prometheus.io/path"] != "/metrics" {
		t.Errorf("prometheus.io annotations %v disagree with the metrics port %d and path /metrics", annotations, metrics)
	}

	probes := map[string]struct {
		probe   *corev1.Probe
		service []string
	}{
		"readinessProbe": {c.ReadinessProbe, []string{readinessService}},
		"livenessProbe":  {c.LivenessProbe, []string{livenessService}},
		"startupProbe":   {c.StartupProbe, []string{livenessService, readinessService}},
	}
	for name, p := range probes {
		if p.probe == nil {
			if name != "startupProbe" {
				t.Errorf("%s missing", name)
			}
			continue
		}
		g := p.probe.GRPC
		if g == nil {
			t.Errorf("%s is not a native gRPC probe", name)
			continue
		}
		if g.Port != grpc {
			t.Errorf("%s dials port %d, want the gRPC container port %d", name, g.Port, grpc)
		}
		if g.Service == nil {
			t.Errorf("%s names no health service, want one of %q", name, p.service)
		} else if !slices.Contains(p.service, *g.Service) {
			t.Errorf("%s asks for health service %q, want one of %q", name, *g.Service, p.service)
		}
	}
	// Liveness is lenient (common practice): a pod busy with long solves
	// must not be restarted, so a minute of failures is needed and each
	// check waits at least 5 s.
	if lp := c.LivenessProbe; lp != nil {
		if lp.PeriodSeconds*lp.FailureThreshold < 60 || lp.TimeoutSeconds < 5 {
			t.Errorf("livenessProbe restarts after %ds of failures with %ds timeouts; want >= 60s and >= 5s",
				lp.PeriodSeconds*lp.FailureThreshold, lp.TimeoutSeconds)
		}
		if rp := c.ReadinessProbe; rp != nil && rp.PeriodSeconds*rp.FailureThreshold >= lp.PeriodSeconds*lp.FailureThreshold {
			t.Error("readinessProbe must react faster than livenessProbe")
		}
	}
}

func TestDeploymentShutdownBudget(t *testing.T) {
	d := one(t, "Deployment", loadManifests(t).Deployments)
	c := fugadContainer(t, d)
	v, ok := containerArg(c.Args, "drain-timeout")
	if !ok {
		t.Fatal("container args must state --drain-timeout so the shutdown budget can be checked")
	}
	drain, err := time.ParseDuration(v)
	if err != nil || drain <= 0 {
		t.Fatalf("--drain-timeout=%s: %v", v, err)
	}
	if c.Lifecycle == nil || c.Lifecycle.PreStop == nil {
		t.Fatal("no preStop hook: the pod would stop serving before endpoints are updated")
	}
	pre := c.Lifecycle.PreStop
	if pre.Exec != nil {
		t.Error("preStop uses exec, but the image has no shell or sleep binary")
	}
	if pre.Sleep == nil || pre.Sleep.Seconds <= 0 {
		t.Fatal("preStop must use the sleep handler with a positive duration")
	}
	sleep := time.Duration(pre.Sleep.Seconds) * time.Second
	grace := d.Spec.Template.Spec.TerminationGracePeriodSeconds
	if grace == nil {
		t.Fatal("terminationGracePeriodSeconds not set (default 30s)")
	}
	if g := time.Duration(*grace) * time.Second; g <= sleep+drain {
		t.Errorf("terminationGracePeriodSeconds %v <= preStop %v + drain %v: the kubelet kills the pod mid-drain", g, sleep, drain)
	}
}

func TestDeploymentSecurity(t *testing.T) {
	d := one(t, "Deployment", loadManifests(t).Deployments)
	c := fugadContainer(t, d)
	pod := d.Spec.Template.Spec
	uid, gid := imageUser(t, loadDockerfile(t))
	ps, cs := pod.SecurityContext, c.SecurityContext
	if ps == nil || cs == nil {
		t.Fatal("pod and container securityContext are both required")
	}
	isTrue := func(b *bool) bool { return b != nil && *b }
	if !isTrue(ps.RunAsNonRoot) || !isTrue(cs.RunAsNonRoot) {
		t.Error("runAsNonRoot must be true for the pod and the container")
	}
	for name, id := range map[string][2]*int64{
		"runAsUser":  {ps.RunAsUser, cs.RunAsUser},
		"runAsGroup": {ps.RunAsGroup, cs.RunAsGroup},
	} {
		want := uid
		if name == "runAsGroup" {
			want = gid
		}
		for _, v := range id {
			if v != nil && *v != want {
				t.Errorf("%s %d differs from the image USER %d:%d", name, *v, uid, gid)
			}
			if v != nil && *v == 0 {
				t.Errorf("%s is 0 (root)", name)
			}
		}
	}
	if !isTrue(cs.ReadOnlyRootFilesystem) {
		t.Error("readOnlyRootFilesystem must be true")
	}
	if cs.AllowPrivilegeEscalation == nil || *cs.AllowPrivilegeEscalation {
		t.Error("allowPrivilegeEscalation must be false")
	}
	if isTrue(cs.Privileged) {
		t.Error("container must not be privileged")
	}
	if cs.Capabilities == nil || !slices.Contains(cs.Capabilities.Drop, "ALL") || len(cs.Capabilities.Add) > 0 {
		t.Errorf("capabilities %+v: want drop [ALL] and nothing added", cs.Capabilities)
	}
	seccomp := cs.SeccompProfile
	if seccomp == nil {
		seccomp = ps.SeccompProfile
	}
	if seccomp == nil || seccomp.Type != corev1.SeccompProfileTypeRuntimeDefault {
		t.Errorf("seccompProfile %+v, want RuntimeDefault", seccomp)
	}
	if pod.AutomountServiceAccountToken == nil || *pod.AutomountServiceAccountToken {
		t.Error("the pod mounts a service account token it never uses")
	}
	m := loadManifests(t)
	if sa := one(t, "ServiceAccount", m.ServiceAccounts); pod.ServiceAccountName != sa.Name {
		t.Errorf("pod uses service account %q, manifests define %q", pod.ServiceAccountName, sa.Name)
	}
}

// goMemLimit parses a GOMEMLIMIT value (runtime/debug.SetMemoryLimit
// syntax: an integer with an optional B, KiB, MiB, GiB or TiB suffix).
func goMemLimit(s string) (int64, error) {
	m := regexp.MustCompile(`^([0-9]+)(B|KiB|MiB|GiB|TiB)?$`).FindStringSubmatch(s)
	if m == nil {
		return 0, fmt.Errorf("GOMEMLIMIT %q is not an integer with a B/KiB/MiB/GiB/TiB suffix", s)
	}
	n, err := strconv.ParseInt(m[1], 10, 64)
	shift := map[string]uint{"": 0, "B": 0, "KiB": 10, "MiB": 20, "GiB": 30, "TiB": 40}[m[2]]
	return n << shift, err
}

func TestDeploymentResources(t *testing.T) {
	d := one(t, "Deployment", loadManifests(t).Deployments)
	c := fugadContainer(t, d)
	for _, name := range []corev1.ResourceName{corev1.ResourceCPU, corev1.ResourceMemory} {
		req, okReq := c.Resources.Requests[name]
		lim, okLim := c.Resources.Limits[name]
		if !okReq || !okLim {
			t.Errorf("%s: both request and limit are required", name)
			continue
		}
		if req.Cmp(lim) > 0 {
			t.Errorf("%s request %s exceeds limit %s", name, req.String(), lim.String())
		}
		if req.Sign() <= 0 {
			t.Errorf("%s request %s must be positive", name, req.String())
		}
	}
	for _, e := range c.Env {
		if e.Name != "GOMEMLIMIT" {
			continue
		}
		n, err := goMemLimit(e.Value)
		if err != nil {
			t.Fatal(err)
		}
		lim := c.Resources.Limits[corev1.ResourceMemory]
		if n >= lim.Value() {
			t.Errorf("GOMEMLIMIT %s (%d B) is not below the memory limit %s", e.Value, n, lim.String())
		}
	}
	if got, err := goMemLimit("900MiB"); err != nil || got != 900<<20 {
		t.Errorf("goMemLimit(900MiB) = %d, %v", got, err)
	}
	if _, err := goMemLimit("1Gi"); err == nil {
		t.Error("goMemLimit accepted the Kubernetes suffix Gi, which the Go runtime rejects")
	}
}

// selects reports whether a Service-style selector picks a pod with these labels.
func selects(selector map[string]string, pod map[string]string) bool {
	return len(selector) > 0 && labels.SelectorFromSet(selector).Matches(labels.Set(pod))
}

func TestServicesSelectPods(t *testing.T) {
	m := loadManifests(t)
	d := one(t, "Deployment", m.Deployments)
	c := fugadContainer(t, d)
	podLabels := d.Spec.Template.Labels
	sel, err := metav1.LabelSelectorAsSelector(d.Spec.Selector)
	if err != nil || !sel.Matches(labels.Set(podLabels)) {
		t.Fatalf("Deployment selector %v does not match its pod labels %v (%v)", d.Spec.Selector, podLabels, err)
	}
	var clusterIP, headless int
	for _, s := range m.Services {
		if !selects(s.Spec.Selector, podLabels) {
			t.Errorf("Service %s selector %v does not match pod labels %v", s.Name, s.Spec.Selector, podLabels)
		}
		switch {
		case s.Spec.ClusterIP == corev1.ClusterIPNone:
			headless++
			if s.Spec.PublishNotReadyAddresses {
				t.Errorf("headless Service %s publishes pods that are not ready", s.Name)
			}
		case s.Spec.Type == corev1.ServiceTypeClusterIP && s.Spec.ClusterIP == "":
			clusterIP++
		default:
			t.Errorf("Service %s: type %q clusterIP %q, want ClusterIP or headless", s.Name, s.Spec.Type, s.Spec.ClusterIP)
		}
		if len(s.Spec.Ports) != 1 {
			t.Errorf("Service %s exposes %d ports, want the gRPC port only", s.Name, len(s.Spec.Ports))
			continue
		}
		p := s.Spec.Ports[0]
		if p.Port != grpcPort || p.AppProtocol == nil || *p.AppProtocol != "grpc" {
			t.Errorf("Service %s port %d appProtocol %v, want %d and grpc", s.Name, p.Port, p.AppProtocol, grpcPort)
		}
		target := p.TargetPort
		if target.Type == intstr.String {
			if containerPort(t, c, target.StrVal) != grpcPort {
				t.Errorf("Service %s targets port %q, which is not the gRPC port", s.Name, target.StrVal)
			}
		} else if target.IntVal != grpcPort {
			t.Errorf("Service %s targets port %d, want %d", s.Name, target.IntVal, grpcPort)
		}
	}
	if clusterIP != 1 || headless != 1 {
		t.Errorf("found %d ClusterIP and %d headless Services, want one of each", clusterIP, headless)
	}
}

func TestAutoscalerAndDisruptionBudget(t *testing.T) {
	m := loadManifests(t)
	d := one(t, "Deployment", m.Deployments)
	c := fugadContainer(t, d)
	hpa := one(t, "HorizontalPodAutoscaler", m.HPAs)
	ref := hpa.Spec.ScaleTargetRef
	if ref.APIVersion != "apps/v1" || ref.Kind != "Deployment" || ref.Name != d.Name {
		t.Errorf("HPA scales %s %s %s, want apps/v1 Deployment %s", ref.APIVersion, ref.Kind, ref.Name, d.Name)
	}
	if hpa.Spec.MinReplicas == nil || d.Spec.Replicas == nil || *hpa.Spec.MinReplicas != *d.Spec.Replicas {
		t.Errorf("HPA minReplicas %v differs from Deployment replicas %v", hpa.Spec.MinReplicas, d.Spec.Replicas)
	}
	minReplicas := *hpa.Spec.MinReplicas
	if hpa.Spec.MaxReplicas <= minReplicas {
		t.Errorf("HPA maxReplicas %d <= minReplicas %d", hpa.Spec.MaxReplicas, minReplicas)
	}
	cpu := false
	for _, metric := range hpa.Spec.Metrics {
		if metric.Type == autoscalingv2.ResourceMetricSourceType && metric.Resource != nil && metric.Resource.Name == corev1.ResourceCPU {
			u := metric.Resource.Target.AverageUtilization
			cpu = metric.Resource.Target.Type == autoscalingv2.UtilizationMetricType && u != nil && *u > 0 && *u < 100
		}
	}
	if !cpu {
		t.Error("HPA needs a CPU utilization target between 0 and 100%")
	}
	if _, ok := c.Resources.Requests[corev1.ResourceCPU]; !ok {
		t.Error("CPU utilization is measured against the CPU request, which is missing")
	}

	pdb := one(t, "PodDisruptionBudget", m.PDBs)
	sel, err := metav1.LabelSelectorAsSelector(pdb.Spec.Selector)
	if err != nil || sel.Empty() || !sel.Matches(labels.Set(d.Spec.Template.Labels)) {
		t.Fatalf("PDB selector %v does not match pod labels %v (%v)", pdb.Spec.Selector, d.Spec.Template.Labels, err)
	}
	// With the fewest replicas the autoscaler allows, a drain must still be
	// able to evict one pod, and at least two must stay up.
	var allowed int
	switch {
	case pdb.Spec.MaxUnavailable != nil:
		n, err := intstr.GetScaledValueFromIntOrPercent(pdb.Spec.MaxUnavailable, int(minReplicas), false)
		if err != nil {
			t.Fatal(err)
		}
		allowed = n
	case pdb.Spec.MinAvailable != nil:
		n, err := intstr.GetScaledValueFromIntOrPercent(pdb.Spec.MinAvailable, int(minReplicas), true)
		if err != nil {
			t.Fatal(err)
		}
		allowed = int(minReplicas) - n
	default:
		t.Fatal("PDB sets neither maxUnavailable nor minAvailable")
	}
	if allowed < 1 || int(minReplicas)-allowed < 2 {
		t.Errorf("PDB allows %d of %d pods down; want at least 1 and at least 2 left serving", allowed, minReplicas)
	}
}
