package alerts

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func TestRouteConfigValidate(t *testing.T) {
	hook := RouteConfig{Name: "oncall", Kind: "webhook", URL: "http://127.0.0.1:9911/hook", SecretEnv: "PLUMB_HOOK_SECRET"}
	with := func(f func(*RouteConfig)) RouteConfig {
		c := hook
		f(&c)
		return c
	}
	tests := []struct {
		name      string
		c         RouteConfig
		wantField string
		wantErr   error
	}{
		{"minimal webhook", hook, "", nil},
		{"log", RouteConfig{Name: "journal", Kind: "log"}, "", nil},
		{"file", RouteConfig{Name: "archive", Kind: "file", Path: "/var/lib/plumb/alerts.jsonl"}, "", nil},
		{"command", RouteConfig{Name: "pager", Kind: "command", Argv: []string{"/usr/local/bin/page", "--team", "lab"}}, "", nil},
		{"no name", with(func(c *RouteConfig) { c.Name = "" }), "name", ErrMissing},
		{"bad name", with(func(c *RouteConfig) { c.Name = "on call" }), "name", ErrInvalid},
		{"no kind", with(func(c *RouteConfig) { c.Kind = "" }), "kind", ErrMissing},
		{"unknown kind", with(func(c *RouteConfig) { c.Kind = "email" }), "kind", ErrInvalid},
		{"no url", with(func(c *RouteConfig) { c.URL = "" }), "url", ErrMissing},
		{"relative url", with(func(c *RouteConfig) { c.URL = "/hook" }), "url", ErrInvalid},
		{"ftp url", with(func(c *RouteConfig) { c.URL = "ftp://host/x" }), "url", ErrInvalid},
		{"two secrets", with(func(c *RouteConfig) { c.SecretFile = "/etc/plumb/hook.key" }), "secret_file", ErrConflict},
		{"file without path", RouteConfig{Name: "a", Kind: "file"}, "path", ErrMissing},
		{"command without argv", RouteConfig{Name: "a", Kind: "command"}, "argv", ErrMissing},
		{"command with empty program", RouteConfig{Name: "a", Kind: "command", Argv: []string{""}}, "argv", ErrMissing},
		{"log with url", RouteConfig{Name: "a", Kind: "log", URL: "http://x/"}, "url", ErrConflict},
		{"log with secret", RouteConfig{Name: "a", Kind: "log", SecretEnv: "X"}, "secret_env", ErrConflict},
		{"webhook with path", with(func(c *RouteConfig) { c.Path = "/tmp/x" }), "path", ErrConflict},
		{"negative timeout", with(func(c *RouteConfig) { c.Timeout = -time.Second }), "timeout", ErrInvalid},
		{"negative attempts", with(func(c *RouteConfig) { c.MaxAttempts = -1 }), "max_attempts", ErrInvalid},
		{"negative backoff", with(func(c *RouteConfig) { c.Backoff = -1 }), "backoff", ErrInvalid},
		{"max below backoff", with(func(c *RouteConfig) { c.Backoff, c.MaxBackoff = time.Minute, time.Second }), "max_backoff", ErrConflict},
		{"negative rate", with(func(c *RouteConfig) { c.RateLimit = -5 }), "rate_limit", ErrInvalid},
		{"unknown alert kind", with(func(c *RouteConfig) { c.Kinds = []string{"drift", "noise"} }), "kinds", ErrInvalid},
		{"empty model", with(func(c *RouteConfig) { c.Models = []string{""} }), "models", ErrInvalid},
		{"bad severity", with(func(c *RouteConfig) { c.MinSeverity = "urgent" }), "min_severity", ErrInvalid},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.c.Validate()
			if !errors.Is(err, tt.wantErr) {
				t.Fatalf("Validate: %v, want %v", err, tt.wantErr)
			}
			if err == nil {
				return
			}
			var ce *ConfigError
			if !errors.As(err, &ce) || ce.Field != tt.wantField {
				t.Fatalf("error %v names field %q, want %q", err, ce.Field, tt.wantField)
			}
			if !strings.Contains(err.Error(), tt.wantField) {
				t.Errorf("message %q does not name the field", err)
			}
		})
	}
	if err := ValidateRoutes([]RouteConfig{hook, hook}); !errors.Is(err, ErrConflict) {
		t.Errorf("duplicate names: %v", err)
	}
	c := hook.WithDefaults()
	if c.Timeout != DefaultTimeout || c.MaxAttempts != DefaultMaxAttempts || c.Backoff != DefaultBackoff || c.MaxBackoff != DefaultMaxBackoff {
		t.Errorf("defaults %+v", c)
	}
}

func TestRulesValidate(t *testing.T) {
	if err := DefaultRules().Validate(); err != nil {
		t.Fatalf("defaults: %v", err)
	}
	tests := []struct {
		name    string
		mutate  func(*Rules)
		section string
		field   string
	}{
		{"severity", func(r *Rules) { r.Drift.Severity = "high" }, "rules.drift", "severity"},
		{"renotify", func(r *Rules) { r.SuspectPoint.Renotify = -time.Minute }, "rules.suspect_point", "renotify"},
		{"test", func(r *Rules) { r.SuspectPoint.Test = "dixon" }, "rules.suspect_point", "test"},
		{"influence empty", func(r *Rules) { r.SuspectPoint.Influence = nil }, "rules.suspect_point", "influence"},
		{"influence unknown", func(r *Rules) { r.SuspectPoint.Influence = []string{"residual"} }, "rules.suspect_point", "influence"},
		{"limit", func(r *Rules) { r.FragileFit.Limit = 0 }, "rules.fragile_fit", "limit"},
		{"k", func(r *Rules) { r.Drift.K = 0 }, "rules.drift", "k"},
		{"tolerance", func(r *Rules) { r.Drift.Tolerance = map[string]float64{"dose": -1} }, "rules.drift", "tolerance"},
		{"baseline rows", func(r *Rules) { r.Drift.BaselineRows = -1 }, "rules.drift", "baseline_rows"},
		{"silence", func(r *Rules) { r.Blocked.Silence = -time.Hour }, "rules.blocked", "silence"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := DefaultRules()
			tt.mutate(&r)
			var ce *ConfigError
			if err := r.Validate(); !errors.As(err, &ce) || ce.Section != tt.section || ce.Field != tt.field {
				t.Errorf("Validate: %v, want %s.%s", err, tt.section, tt.field)
			}
		})
	}
}

func TestSecretNeverPrints(t *testing.T) {
	const raw = "hunter2-very-secret"
	s := NewSecret([]byte(raw))
	holder := struct {
		Name   string
		Secret Secret
		hidden Secret
	}{"oncall", s, s}
	var logBuf bytes.Buffer
	slog.New(slog.NewJSONHandler(&logBuf, nil)).Info("route", "secret", s, "holder", holder)
	js, _ := json.Marshal(holder)
	outs := []string{
		s.String(), fmt.Sprint(s), fmt.Sprintf("%v %+v %#v %s %q %x", s, s, s, s, s, s),
		fmt.Sprintf("%v %+v %#v", holder, holder, holder), logBuf.String(), string(js),
	}
	for _, o := range outs {
		if strings.Contains(o, raw) || strings.Contains(o, fmt.Sprintf("%x", raw)) {
			t.Errorf("secret leaked: %s", o)
		}
	}
	if !strings.Contains(outs[1], "[redacted]") {
		t.Errorf("String: %q", outs[1])
	}
	route, err := NewRoute(RouteConfig{Name: "oncall", Kind: "webhook", URL: "http://127.0.0.1:1/", SecretEnv: "K"},
		RouteOptions{Getenv: func(string) string { return raw }})
	if err != nil {
		t.Fatal(err)
	}
	if o := fmt.Sprintf("%v %+v", route, *route); strings.Contains(o, raw) {
		t.Errorf("route printed its secret: %s", o)
	}
}

func TestLoadSecret(t *testing.T) {
	dir := t.TempDir()
	keyFile := filepath.Join(dir, "hook.key")
	os.WriteFile(keyFile, []byte("  from-file\n"), 0o600)
	empty := filepath.Join(dir, "empty.key")
	os.WriteFile(empty, []byte("\n"), 0o600)
	env := func(k string) string { return map[string]string{"SET": " from-env "}[k] }
	tests := []struct {
		name    string
		c       RouteConfig
		want    string
		wantErr error
		field   string
	}{
		{"env", RouteConfig{Name: "a", SecretEnv: "SET"}, "from-env", nil, ""},
		{"file", RouteConfig{Name: "a", SecretFile: keyFile}, "from-file", nil, ""},
		{"none", RouteConfig{Name: "a"}, "", nil, ""},
		{"unset env", RouteConfig{Name: "a", SecretEnv: "UNSET"}, "", ErrMissing, "secret_env"},
		{"missing file", RouteConfig{Name: "a", SecretFile: filepath.Join(dir, "nope")}, "", ErrInvalid, "secret_file"},
		{"empty file", RouteConfig{Name: "a", SecretFile: empty}, "", ErrMissing, "secret_file"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			s, err := LoadSecret(tt.c, env)
			if !errors.Is(err, tt.wantErr) {
				t.Fatalf("err %v, want %v", err, tt.wantErr)
			}
			var ce *ConfigError
			if err != nil && (!errors.As(err, &ce) || ce.Field != tt.field) {
				t.Errorf("err %v, want field %s", err, tt.field)
			}
			if string(s.bytes()) != tt.want {
				t.Errorf("secret %q, want %q", s.bytes(), tt.want)
			}
		})
	}
}

func TestIDStable(t *testing.T) {
	// The id is part of the wire format (event ids, idempotency keys): it
	// must never change for the same triple.
	tests := []struct {
		model, subject string
		kind           Kind
		want           string
	}{
		{"bench-b", "bench-b/feed.csv:212", KindSuspectPoint, "sp-0b45c711a175d0ec"},
		{"bench-b", "bench-b", KindFragileFit, "ff-5574aa51b9f35b45"},
	}
	for _, tt := range tests {
		if got := ID(tt.model, tt.kind, tt.subject); got != tt.want {
			t.Errorf("ID(%s, %s, %s) = %s, want %s", tt.model, tt.kind, tt.subject, got, tt.want)
		}
	}
	if ID("a", KindDrift, "b/c") == ID("a/b", KindDrift, "c") {
		t.Error("ids collide across the model/subject boundary")
	}
}

func TestNonFiniteAsNull(t *testing.T) {
	m := Measure{Measure: "dffits", Value: nan(), Cutoff: 0.69}
	b, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	if string(b) != `{"name":"dffits","value":null,"cutoff":0.69}` {
		t.Errorf("got %s", b)
	}
	var back Measure
	if err := json.Unmarshal(b, &back); err != nil || back.Value == back.Value || back.Cutoff != 0.69 {
		t.Errorf("round trip %+v %v", back, err)
	}
	v := Values{"dose": 3, "h": nan()}
	b, _ = json.Marshal(v)
	if string(b) != `{"dose":3,"h":null}` {
		t.Errorf("values %s", b)
	}
}
