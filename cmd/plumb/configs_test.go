package main

import (
	"bufio"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/daemon"
)

// configsDir holds the example configs and the systemd unit.
const configsDir = "../../configs"

// TestExampleConfigsLoad loads every configs/*.toml with config.Load and
// with the loader of "plumb config check", which also parses each model's
// terms.
func TestExampleConfigsLoad(t *testing.T) {
	paths, err := filepath.Glob(filepath.Join(configsDir, "*.toml"))
	if err != nil {
		t.Fatal(err)
	}
	want := map[string]bool{"calibration-line.toml": false, "long-study.toml": false, "oncall-webhook.toml": false}
	for _, p := range paths {
		name := filepath.Base(p)
		if _, ok := want[name]; ok {
			want[name] = true
		}
		t.Run(name, func(t *testing.T) {
			c, err := config.Load(p)
			if err != nil {
				t.Fatalf("config.Load: %v", err)
			}
			if len(c.Models) == 0 || len(c.Routes) == 0 {
				t.Errorf("%d models, %d routes: an example should show both", len(c.Models), len(c.Routes))
			}
			if _, err := loadConfig(p); err != nil {
				t.Errorf("plumb config check: %v", err)
			}
			src, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			if !strings.HasPrefix(string(src), "# plumb example: ") {
				t.Errorf("the file does not open with its comment header")
			}
			code, out, errOut := runCapture(t, "config", "check", "--config", p)
			if code != 0 || !strings.Contains(out, "valid") {
				t.Errorf("plumb config check: exit %d\n%s%s", code, out, errOut)
			}
		})
	}
	for name, seen := range want {
		if !seen {
			t.Errorf("configs/%s is missing", name)
		}
	}
}

// TestExampleConfigsStart builds a daemon from each example (copied into a
// temporary directory, so its relative paths land there): the routes,
// rules and models it describes are accepted by the daemon too. The
// daemon is closed without running.
func TestExampleConfigsStart(t *testing.T) {
	t.Setenv("PLUMB_WEBHOOK_SECRET", "example-secret")
	t.Setenv("PLUMB_TOKEN", "example-token")
	paths, err := filepath.Glob(filepath.Join(configsDir, "*.toml"))
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range paths {
		t.Run(filepath.Base(p), func(t *testing.T) {
			src, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			dir := t.TempDir()
			cp := filepath.Join(dir, filepath.Base(p))
			if err := os.WriteFile(cp, src, 0o644); err != nil {
				t.Fatal(err)
			}
			cfg, err := loadConfig(cp)
			if err != nil {
				t.Fatal(err)
			}
			// The state database's folder is the operator's to create.
			if err := os.MkdirAll(filepath.Dir(cfg.Resolve(cfg.State)), 0o755); err != nil {
				t.Fatal(err)
			}
			d, err := daemon.New(context.Background(), cfg, daemon.Options{})
			if err != nil {
				t.Fatalf("daemon.New: %v", err)
			}
			if err := d.Close(); err != nil {
				t.Errorf("Close: %v", err)
			}
		})
	}
}

// TestExampleConfigsShow checks that each example shows what it is there
// to show.
func TestExampleConfigsShow(t *testing.T) {
	load := func(t *testing.T, name string) *config.Config {
		t.Helper()
		c, err := config.Load(filepath.Join(configsDir, name))
		if err != nil {
			t.Fatal(err)
		}
		return c
	}
	t.Run("calibration-line", func(t *testing.T) {
		c := load(t, "calibration-line.toml")
		if len(c.Models) < 3 {
			t.Errorf("%d benches, want several", len(c.Models))
		}
		sizeAdjusted, quadratic := 0, 0
		for _, m := range c.Models {
			if m.Judge.Cutoffs == "size_adjusted" {
				sizeAdjusted++
			}
			for _, term := range m.Terms {
				if strings.HasSuffix(term, "^2") {
					quadratic++
					break
				}
			}
			if len(m.Checkpoints) == 0 || len(m.Region) == 0 {
				t.Errorf("model %s: no checkpoint or no region", m.Name)
			}
		}
		if sizeAdjusted != 1 || quadratic < 2 {
			t.Errorf("%d size-adjusted models (want 1), %d quadratic (want several)", sizeAdjusted, quadratic)
		}
	})
	t.Run("long-study", func(t *testing.T) {
		c := load(t, "long-study.toml")
		for _, m := range c.Models {
			if m.TimeColumn == "" || m.Window.Span.Duration == 0 || m.MinRows == 0 {
				t.Errorf("model %s: time column %q, window span %v, min_rows %d", m.Name, m.TimeColumn, m.Window.Span, m.MinRows)
			}
			hasLog := false
			for _, term := range m.Terms {
				hasLog = hasLog || strings.HasPrefix(term, "log(")
			}
			if !hasLog {
				t.Errorf("model %s: no log() term", m.Name)
			}
		}
	})
	t.Run("oncall-webhook", func(t *testing.T) {
		c := load(t, "oncall-webhook.toml")
		kinds := map[string]config.Route{}
		for _, r := range c.Routes {
			kinds[r.Kind] = r
		}
		hook, ok := kinds["webhook"]
		if !ok || hook.SecretEnv == "" || len(hook.Kinds) == 0 || hook.MinSeverity == "" {
			t.Errorf("webhook route %+v: want secret_env and kind and severity filters", hook)
		}
		if _, ok := kinds["file"]; !ok {
			t.Error("no file route")
		}
		if cmd, ok := kinds["command"]; !ok || len(cmd.Argv) == 0 {
			t.Error("no command route")
		}
		for _, m := range c.Models {
			if len(m.Routes) == 0 {
				t.Errorf("model %s names no routes", m.Name)
			}
		}
	})
}

// unitFile reads a systemd unit into section -> key -> values (a key may
// repeat). Lines starting with '#' or ';' are comments.
func unitFile(t *testing.T, path string) map[string]map[string][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	out := map[string]map[string][]string{}
	section := ""
	sc := bufio.NewScanner(f)
	for n := 1; sc.Scan(); n++ {
		line := strings.TrimSpace(sc.Text())
		switch {
		case line == "" || line[0] == '#' || line[0] == ';':
		case strings.HasPrefix(line, "[") && strings.HasSuffix(line, "]"):
			section = line[1 : len(line)-1]
			out[section] = map[string][]string{}
		default:
			k, v, ok := strings.Cut(line, "=")
			if !ok || section == "" {
				t.Fatalf("%s:%d: not a key=value line in a section: %q", path, n, line)
			}
			out[section][strings.TrimSpace(k)] = append(out[section][strings.TrimSpace(k)], strings.TrimSpace(v))
		}
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// TestSystemdUnit checks the hardening of configs/plumb.service (keys as
// in systemd.exec(5), systemd.service(5)) and that its command line is one
// the binary accepts.
func TestSystemdUnit(t *testing.T) {
	u := unitFile(t, filepath.Join(configsDir, "plumb.service"))
	svc, ok := u["Service"]
	if !ok {
		t.Fatal("no [Service] section")
	}
	exact := map[string]string{
		"Type":                   "simple", // the daemon does not send READY=1
		"ExecStart":              "/usr/local/bin/plumb run --config /etc/plumb/plumb.toml",
		"ExecReload":             "/bin/kill -HUP $MAINPID",
		"Restart":                "on-failure",
		"StateDirectory":         "plumb",
		"ConfigurationDirectory": "plumb",
		"ProtectSystem":          "strict",
		"ProtectHome":            "yes",
		"PrivateTmp":             "yes",
		"NoNewPrivileges":        "yes",
	}
	for k, want := range exact {
		if got := svc[k]; len(got) != 1 || got[0] != want {
			t.Errorf("%s = %q, want %q", k, got, want)
		}
	}
	for _, k := range []string{"RestartSec", "ReadWritePaths", "ReadOnlyPaths"} {
		if len(svc[k]) == 0 || svc[k][0] == "" {
			t.Errorf("%s is not set", k)
		}
	}
	if rw := svc["ReadWritePaths"]; len(rw) == 0 || !strings.Contains(rw[0], "/var/lib/plumb") {
		t.Errorf("ReadWritePaths %q does not name the state directory /var/lib/plumb", rw)
	}
	// A dedicated user: a dynamic one, or a named one that is not root.
	dyn := len(svc["DynamicUser"]) == 1 && svc["DynamicUser"][0] == "yes"
	named := len(svc["User"]) == 1 && svc["User"][0] != "" && svc["User"][0] != "root"
	if !dyn && !named {
		t.Errorf("DynamicUser %q, User %q: want a dedicated user", svc["DynamicUser"], svc["User"])
	}
	if len(u["Install"]["WantedBy"]) == 0 {
		t.Error("[Install] has no WantedBy")
	}

	// The binary accepts the flags of ExecStart.
	args := strings.Fields(exact["ExecStart"])[1:]
	code, _, errOut := runCapture(t, append(args[:1:1], "--help")...)
	if code != 0 || !strings.Contains(errOut, "-"+strings.TrimPrefix(args[1], "--")) {
		t.Errorf("plumb %s --help: exit %d, no %s flag:\n%s", args[0], code, args[1], errOut)
	}
}
