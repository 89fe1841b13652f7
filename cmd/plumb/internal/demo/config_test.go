package demo

import (
	"os"
	"path/filepath"
	"testing"

	"plumb/cmd/plumb/internal/config"
	"plumb/engine"
)

func TestConfigLoads(t *testing.T) {
	dir := t.TempDir()
	path, err := Config(dir, "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	if path != filepath.Join(dir, "plumb.toml") {
		t.Errorf("path %q", path)
	}
	if fi, err := os.Stat(filepath.Join(dir, "incoming", "bench-b")); err != nil || !fi.IsDir() {
		t.Errorf("the watched folder was not created: %v", err)
	}
	c, err := config.Load(path)
	if err != nil {
		t.Fatalf("config.Load: %v\n%s", err, ConfigText("127.0.0.1:0"))
	}
	if c.Listen != "127.0.0.1:0" {
		t.Errorf("listen %q", c.Listen)
	}
	if got, want := c.Resolve(c.State), filepath.Join(dir, "plumb.db"); got != want {
		t.Errorf("state resolves to %q, want %q", got, want)
	}
	if len(c.Models) != 1 {
		t.Fatalf("%d models", len(c.Models))
	}
	m := c.Models[0]
	if m.Name != ModelName || c.Resolve(m.Folder) != filepath.Join(dir, "incoming", "bench-b") {
		t.Errorf("model %q watches %q", m.Name, c.Resolve(m.Folder))
	}
	if ok, _ := filepath.Match(m.Pattern, FeedName); !ok {
		t.Errorf("pattern %q does not match the feed %q", m.Pattern, FeedName)
	}
	if m.Response != Response || len(m.Terms) != 2 || m.Terms[0] != "emf_mv" || m.Terms[1] != "emf_mv^2" || !*m.Intercept {
		t.Errorf("model %s ~ %v (intercept %v)", m.Response, m.Terms, *m.Intercept)
	}
	if _, err := engine.NewModel(m.Response, m.Terms, *m.Intercept); err != nil {
		t.Errorf("terms do not parse: %v", err)
	}
	// The settings the scenario's proof relies on.
	if m.Window.Rows != WindowRows || m.MinRows != MinRows {
		t.Errorf("window %d rows, min_rows %d", m.Window.Rows, m.MinRows)
	}
	if m.Judge.Cutoffs != "absolute" || m.Judge.CookRule != "f_median" || m.Judge.Alpha != 0.05 || m.Judge.OutlierTest != "bonferroni" {
		t.Errorf("judge %+v", m.Judge)
	}
	if !*m.Fragility.Enabled || m.Fragility.Limit != 2 || m.Fragility.MaxRemoved != 3 {
		t.Errorf("fragility %+v", m.Fragility)
	}
	if r := m.Region[Predictor]; len(r) != 2 || r[0] != RegionLow || r[1] != RegionHigh {
		t.Errorf("region %v", m.Region)
	}
	if len(m.Checkpoints) != len(Checkpoints) {
		t.Fatalf("%d checkpoints", len(m.Checkpoints))
	}
	for i, cp := range m.Checkpoints {
		want := Checkpoints[i]
		if cp.Name != want.Name || cp.At[Predictor] != want.EmfMV || cp.Tolerance != want.Tolerance {
			t.Errorf("checkpoint %d: %+v, want %+v", i, cp, want)
		}
	}
	d := m.Alerts.Drift
	if !*d.Enabled || d.K != DriftK || d.BaselineRows != BaselineRows {
		t.Errorf("drift rule %+v", d)
	}
	if len(c.Routes) != 2 {
		t.Fatalf("%d routes", len(c.Routes))
	}
	file := c.Routes[1]
	if file.Kind != "file" || c.Resolve(file.Path) != filepath.Join(dir, "alerts.jsonl") {
		t.Errorf("file route %+v", file)
	}
	if len(m.Routes) != 2 {
		t.Errorf("model routes %v", m.Routes)
	}
}

func TestConfigNoListener(t *testing.T) {
	dir := t.TempDir()
	path, err := Config(dir, "")
	if err != nil {
		t.Fatal(err)
	}
	c, err := config.Load(path)
	if err != nil {
		t.Fatal(err)
	}
	if c.Listen != "" {
		t.Errorf("listen %q, want the server off", c.Listen)
	}
}
