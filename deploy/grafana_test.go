package deploy

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
)

// grafanaPanel is the part of a Grafana dashboard panel the checks read.
type grafanaPanel struct {
	ID         int    `json:"id"`
	Type       string `json:"type"`
	Title      string `json:"title"`
	Datasource *struct {
		Type string `json:"type"`
		UID  string `json:"uid"`
	} `json:"datasource"`
	GridPos struct{ X, Y, W, H int } `json:"gridPos"`
	Targets []struct {
		RefID string `json:"refId"`
		Expr  string `json:"expr"`
	} `json:"targets"`
	Panels []grafanaPanel `json:"panels"` // panels of a collapsed row
}

// grafanaDashboard is the part of the dashboard model the checks read.
type grafanaDashboard struct {
	Title         string         `json:"title"`
	UID           string         `json:"uid"`
	SchemaVersion int            `json:"schemaVersion"`
	Panels        []grafanaPanel `json:"panels"`
	Templating    struct {
		List []struct {
			Name  string          `json:"name"`
			Type  string          `json:"type"`
			Query json.RawMessage `json:"query"`
		} `json:"list"`
	} `json:"templating"`
}

// grafanaBuiltins are the variables Grafana defines itself.
var grafanaBuiltins = []string{"__rate_interval", "__interval", "__range", "__range_s"}

func loadDashboard(t testing.TB) *grafanaDashboard {
	t.Helper()
	src, err := os.ReadFile(filepath.Join(repoRoot(t), "deploy", "grafana", "fugad-dashboard.json"))
	if err != nil {
		t.Fatal(err)
	}
	var d grafanaDashboard
	if err := json.Unmarshal(src, &d); err != nil {
		t.Fatalf("fugad-dashboard.json: %v", err)
	}
	return &d
}

// labelValuesQuery is Grafana's templating query label_values(selector, label).
var labelValuesQuery = regexp.MustCompile(`^label_values\((.+),\s*([a-zA-Z_][a-zA-Z0-9_]*)\s*\)$`)

// checkLabelValues checks a label_values query: a known selector and a
// label that its series carry.
func checkLabelValues(q string) error {
	m := labelValuesQuery.FindStringSubmatch(q)
	if m == nil {
		return fmt.Errorf("%q is not label_values(selector, label)", q)
	}
	refs, err := checkPromQL(m[1])
	if err != nil {
		return err
	}
	for _, s := range refs.Selectors {
		if l, _ := seriesLabels(s.Name); !slices.Contains(l, m[2]) {
			return fmt.Errorf("%s has no label %s", s.Name, m[2])
		}
	}
	return nil
}

func TestCheckLabelValues(t *testing.T) {
	if err := checkLabelValues(`label_values(fugad_solver_iterations_bucket{job="fugad"}, stage)`); err != nil {
		t.Error(err)
	}
	for _, bad := range []string{
		`label_values(fugad_solver_iterations_bucket, reason)`,
		`label_values(fugad_iterations_bucket, stage)`,
		`label_values(stage)`,
	} {
		if checkLabelValues(bad) == nil {
			t.Errorf("checkLabelValues(%q) accepted it", bad)
		}
	}
}

func TestDashboard(t *testing.T) {
	d := loadDashboard(t)
	if d.Title == "" || d.UID == "" || d.SchemaVersion < 36 {
		t.Errorf("title %q uid %q schemaVersion %d: want a title, a uid and schemaVersion >= 36", d.Title, d.UID, d.SchemaVersion)
	}
	vars := slices.Clone(grafanaBuiltins)
	for _, v := range d.Templating.List {
		vars = append(vars, v.Name)
		if v.Type != "query" {
			continue
		}
		var q struct{ Query string }
		if err := json.Unmarshal(v.Query, &q); err != nil || q.Query == "" {
			t.Errorf("variable %s: query %s", v.Name, v.Query)
			continue
		}
		if err := checkLabelValues(q.Query); err != nil {
			t.Errorf("variable %s: %v", v.Name, err)
		}
	}
	if !slices.Contains(vars, "datasource") {
		t.Error("no datasource variable: the dashboard would be tied to one Prometheus")
	}

	var panels []grafanaPanel
	for _, p := range d.Panels {
		panels = append(panels, p)
		panels = append(panels, p.Panels...)
	}
	ids := map[int]bool{}
	used := map[string]bool{}
	type rect struct{ x, y, w, h int }
	var placed []rect
	for _, p := range panels {
		if ids[p.ID] || p.ID == 0 {
			t.Errorf("panel %q: id %d is zero or repeated", p.Title, p.ID)
		}
		ids[p.ID] = true
		g := p.GridPos
		if g.W <= 0 || g.H <= 0 || g.X < 0 || g.X+g.W > 24 {
			t.Errorf("panel %q: gridPos %+v outside the 24-column grid", p.Title, g)
		}
		r := rect{g.X, g.Y, g.W, g.H}
		for _, q := range placed {
			if r.x < q.x+q.w && q.x < r.x+r.w && r.y < q.y+q.h && q.y < r.y+r.h {
				t.Errorf("panel %q overlaps another panel at %+v", p.Title, q)
			}
		}
		placed = append(placed, r)
		if p.Type == "row" {
			continue
		}
		if p.Title == "" || len(p.Targets) == 0 {
			t.Errorf("panel %d (%s): needs a title and at least one query", p.ID, p.Type)
		}
		if p.Datasource == nil || p.Datasource.Type != "prometheus" || p.Datasource.UID != "${datasource}" {
			t.Errorf("panel %q: datasource %+v, want the ${datasource} variable", p.Title, p.Datasource)
		}
		for _, tg := range p.Targets {
			refs, err := checkPromQL(tg.Expr)
			if err != nil {
				t.Errorf("panel %q target %s: %v", p.Title, tg.RefID, err)
				continue
			}
			for _, v := range refs.Variables {
				if !slices.Contains(vars, v) {
					t.Errorf("panel %q target %s: variable $%s is not defined", p.Title, tg.RefID, v)
				}
			}
			for _, s := range refs.Selectors {
				used[s.Name] = true
			}
		}
	}
	// What an operator looks at first: states solved per second, latency,
	// errors, shed load, cache hit ratio, non-convergence and iterations.
	for _, want := range []string{
		"fugad_solve_duration_seconds_count", "grpc_server_handling_seconds_bucket",
		"grpc_server_handled_total", "fugad_shed_total", "fugad_cache_hits_total",
		"fugad_cache_misses_total", "fugad_solver_nonconverged_total", "fugad_solver_iterations_bucket",
	} {
		if !used[want] {
			t.Errorf("no panel shows %s", want)
		}
	}
	var unused []string
	for name, m := range exportedMetrics {
		if m.Kind == histogram {
			name += "_bucket"
		}
		if !used[name] && !used[strings.TrimSuffix(name, "_bucket")+"_count"] && !used[strings.TrimSuffix(name, "_bucket")+"_sum"] {
			unused = append(unused, name)
		}
	}
	slices.Sort(unused)
	if len(unused) > 0 {
		t.Errorf("exported metrics no panel shows: %q", unused)
	}
}
