package alerts

import (
	"testing"
	"time"

	"github.com/BurntSushi/toml"
)

// TestTOMLKeys decodes the documented config keys the way the cmd layer
// does: onto DefaultRules, with no key left undecoded.
func TestTOMLKeys(t *testing.T) {
	const doc = `
[rules.suspect_point]
severity = "critical"
test = "grubbs"
renotify = "30m"

[rules.drift]
k = 2.5
baseline_rows = 12
tolerance = { "at dose 50" = 0.4 }

[rules.blocked]
silence = "2h"

[[route]]
name = "oncall"
kind = "webhook"
url = "http://127.0.0.1:9911/hook"
secret_env = "PLUMB_HOOK_SECRET"

[[route]]
name = "pager"
kind = "command"
argv = ["/usr/local/bin/page", "--team", "lab"]
timeout = "5s"
max_attempts = 4
backoff = "1s"
max_backoff = "1m"
rate_limit = 6
kinds = ["drift", "blocked"]
min_severity = "warning"
`
	var cfg struct {
		Rules Rules         `toml:"rules"`
		Route []RouteConfig `toml:"route"`
	}
	cfg.Rules = DefaultRules()
	md, err := toml.Decode(doc, &cfg)
	if err != nil {
		t.Fatal(err)
	}
	if u := md.Undecoded(); len(u) > 0 {
		t.Fatalf("undecoded keys %v", u)
	}
	if err := cfg.Rules.Validate(); err != nil {
		t.Fatal(err)
	}
	if err := ValidateRoutes(cfg.Route); err != nil {
		t.Fatal(err)
	}
	r := cfg.Rules
	if r.SuspectPoint.Severity != SeverityCritical || r.SuspectPoint.Test != "grubbs" ||
		r.SuspectPoint.Renotify != 30*time.Minute || !r.SuspectPoint.Enabled ||
		len(r.SuspectPoint.Influence) != 2 {
		t.Errorf("suspect_point %+v", r.SuspectPoint)
	}
	if r.Drift.K != 2.5 || r.Drift.BaselineRows != 12 || r.Drift.Tolerance["at dose 50"] != 0.4 {
		t.Errorf("drift %+v", r.Drift)
	}
	if r.Blocked.Silence != 2*time.Hour || r.FragileFit.Limit != DefaultFragileLimit {
		t.Errorf("blocked %+v fragile %+v", r.Blocked, r.FragileFit)
	}
	p := cfg.Route[1]
	if p.Timeout != 5*time.Second || p.MaxAttempts != 4 || p.Backoff != time.Second || p.MaxBackoff != time.Minute ||
		p.RateLimit != 6 || len(p.Argv) != 3 || p.MinSeverity != "warning" || len(p.Kinds) != 2 {
		t.Errorf("pager %+v", p)
	}
}
