package main

import (
	"net/url"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// TestPostgresDecideAndAudit: a line's SQLite history with decisions is
// moved to PostgreSQL with plumb state copy (twice), the trail keeps its
// head, and plumb decide and plumb audit then work on the shared
// database: a reading reinstated by file and line, the list, the trail
// verified and exported.
func TestPostgresDecideAndAudit(t *testing.T) {
	_, stateURL := fleetSchema(t)
	cfg, dbPath := decideFixture(t)
	if _, err := osActor(); err != nil {
		t.Skip(err)
	}
	mustRun(t, "decide", "exclude", "--config", cfg, "--model", "bench", "--row", "runs/a.csv:5",
		"--reason", "range switch left on 200 mV", "--alert", "al-12")
	mustRun(t, "decide", "quiet", "--config", cfg, "--all", "--from", "now", "--for", "1h", "--reason", "pump maintenance")
	headRe := regexp.MustCompile(`\b2:[0-9a-f]{64}\b`)
	head := headRe.FindString(mustRun(t, "audit", "verify", "--config", cfg))
	if head == "" {
		t.Fatal("audit verify on the SQLite state printed no head 2:HASH")
	}

	// The command line takes no password: give it in PGPASSWORD.
	u, err := url.Parse(stateURL)
	if err != nil {
		t.Fatal(err)
	}
	if pw, ok := u.User.Password(); ok {
		t.Setenv("PGPASSWORD", pw)
		u.User = url.User(u.User.Username())
	}
	for i, copied := range []string{"(copied now: 2)", "(copied now: 0)"} {
		out := mustRun(t, "state", "copy", "--from", dbPath, "--to", u.String())
		t.Logf("copy %d:\n%s", i+1, out)
		for _, want := range []string{"decisions: 1 on readings, 0 re-baselines, 1 quiet periods verified",
			"audit trail: 2 records copied as they are " + copied, "chain intact, head " + strings.Replace(head, ":", " ", 1)} {
			if !strings.Contains(out, want) {
				t.Errorf("copy %d: output lacks %q:\n%s", i+1, want, out)
			}
		}
	}

	pgCfg := filepath.Join(t.TempDir(), "plumb.toml")
	if err := os.WriteFile(pgCfg, []byte(`state_env = "PLUMB_DECIDE_PG_STATE"
listen = ""
quiet_max = "4h"

[[model]]
name = "bench"
folder = "in"
response = "y"
terms = ["x"]
`), 0o644); err != nil {
		t.Fatal(err)
	}
	t.Setenv("PLUMB_DECIDE_PG_STATE", stateURL)
	if out := mustRun(t, "audit", "verify", "--config", pgCfg); !strings.Contains(out, "audit trail intact: 2 records") || !strings.Contains(out, head) {
		t.Fatalf("audit verify on PostgreSQL after the copy printed %q, want 2 intact records and head %s", out, head)
	}
	out := mustRun(t, "decide", "reinstate", "--config", pgCfg, "--model", "bench", "--row", "runs/a.csv:5", "--reason", "re-run agrees")
	if !strings.Contains(out, "reinstated") || !strings.Contains(out, "audit record 3") {
		t.Errorf("reinstate on PostgreSQL printed %q", out)
	}
	out = mustRun(t, "decide", "list", "--config", pgCfg, "--model", "bench")
	for _, want := range []string{"(0 set aside now)", "runs/a.csv:5", "range switch left on 200 mV", "re-run agrees", "pump maintenance", "al-12"} {
		if !strings.Contains(out, want) {
			t.Errorf("list on PostgreSQL lacks %q:\n%s", want, out)
		}
	}
	if out := mustRun(t, "audit", "verify", "--config", pgCfg, "--kept", head); !strings.Contains(out, "audit trail intact: 3 records") ||
		!strings.Contains(out, "kept record 2 is in the trail") {
		t.Errorf("audit verify --kept on PostgreSQL printed %q", out)
	}
	csvOut := mustRun(t, "audit", "export", "--config", pgCfg, "--format", "csv")
	if lines := strings.Split(strings.TrimSpace(csvOut), "\n"); len(lines) != 4 || !strings.Contains(lines[3], "reinstate") {
		t.Errorf("audit export on PostgreSQL: %q", csvOut)
	}
	// The SQLite history now holds another trail than the database: a
	// copy from it again would mix them, and is refused.
	mustRun(t, "decide", "exclude", "--config", cfg, "--model", "bench", "--row", "runs/a.csv:6", "--reason", "late change on the old state")
	if _, errOut, code := runPlumb(t, "", "state", "copy", "--from", dbPath, "--to", u.String()); code != 1 ||
		!strings.Contains(errOut, "different audit trail") || !strings.Contains(errOut, "nothing was copied") {
		t.Errorf("copy onto a trail that went on: exit %d, %q", code, errOut)
	}
}
