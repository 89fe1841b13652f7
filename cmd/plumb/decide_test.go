package main

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"plumb/store"
	"plumb/store/sqlite"
)

// decideFixture writes a config and a state database holding 10 readings
// of model "bench" from runs/a.csv (lines 2..11), and returns the config
// path and the database path.
func decideFixture(t *testing.T) (cfg, dbPath string) {
	t.Helper()
	dir := t.TempDir()
	cfg = filepath.Join(dir, "plumb.toml")
	src := `state = "state.db"
listen = ""
quiet_max = "4h"

[[model]]
name = "bench"
folder = "in"
response = "y"
terms = ["x"]
`
	if err := os.WriteFile(cfg, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	dbPath = filepath.Join(dir, "state.db")
	db, err := sqlite.Open(context.Background(), dbPath)
	if err != nil {
		t.Fatal(err)
	}
	b := store.Batch{Source: store.Source{Model: "bench", Path: "runs/a.csv", Offset: 200, Line: 11}}
	for l := 2; l <= 11; l++ {
		b.Observations = append(b.Observations, store.Observation{Line: l, Raw: fmt.Sprintf("%d,%d", l, 2*l), Values: []float64{float64(2 * l), float64(l)}})
	}
	if _, err := db.Ingest(context.Background(), b); err != nil {
		t.Fatal(err)
	}
	if err := db.Close(); err != nil {
		t.Fatal(err)
	}
	return cfg, dbPath
}

func mustRun(t *testing.T, args ...string) string {
	t.Helper()
	out, errOut, code := runPlumb(t, "", args...)
	if code != 0 {
		t.Fatalf("plumb %s: exit %d\n%s%s", strings.Join(args, " "), code, out, errOut)
	}
	return out
}

func TestDecideAndAudit(t *testing.T) {
	cfg, dbPath := decideFixture(t)
	actor, err := osActor()
	if err != nil {
		t.Skip(err)
	}
	out := mustRun(t, "decide", "exclude", "--config", cfg, "--model", "bench", "--row", "runs/a.csv:5",
		"--reason", "range switch left on 200 mV", "--alert", "al-12")
	if !strings.Contains(out, "set aside by "+actor) || !strings.Contains(out, "range switch left on 200 mV") || !strings.Contains(out, "never deletes") {
		t.Errorf("exclude printed %q", out)
	}
	mustRun(t, "decide", "reinstate", "--config", cfg, "--model", "bench", "--row", "runs/a.csv:5", "--reason", "re-run agrees")
	mustRun(t, "decide", "exclude", "--config", cfg, "--model", "bench", "--obs", "7", "--reason", "bubble in the cell")
	mustRun(t, "decide", "rebaseline", "--config", cfg, "--model", "bench", "--from", "2026-05-04T08:00:00Z", "--reason", "sensor replaced")
	out = mustRun(t, "decide", "quiet", "--config", cfg, "--all", "--from", "now", "--for", "2h", "--reason", "pump maintenance")
	if !strings.HasPrefix(out, "quiet period 1 for all models") {
		t.Errorf("quiet printed %q", out)
	}
	mustRun(t, "decide", "end-quiet", "1", "--config", cfg, "--reason", "done early")
	out = mustRun(t, "decide", "list", "--config", cfg, "--model", "bench")
	for _, want := range []string{"(1 set aside now)", "runs/a.csv:5", "runs/a.csv:8", "sensor replaced", "pump maintenance", "al-12"} {
		if !strings.Contains(out, want) {
			t.Errorf("list lacks %q:\n%s", want, out)
		}
	}

	refused := []struct {
		name string
		args []string
		code int
		msg  string
	}{
		{"no reason", []string{"decide", "exclude", "--config", cfg, "--model", "bench", "--row", "runs/a.csv:6"}, 2, "--reason is required"},
		{"twice", []string{"decide", "exclude", "--config", cfg, "--model", "bench", "--obs", "7", "--reason", "again"}, 1, "already set aside"},
		{"no such row", []string{"decide", "exclude", "--config", cfg, "--model", "bench", "--row", "runs/a.csv:99", "--reason", "r"}, 1, "no reading at runs/a.csv:99"},
		{"quiet too long", []string{"decide", "quiet", "--config", cfg, "--model", "bench", "--from", "now", "--for", "5h", "--reason", "r"}, 2, "quiet_max"},
		{"quiet without end", []string{"decide", "quiet", "--config", cfg, "--model", "bench", "--from", "now", "--reason", "r"}, 2, "always ends"},
		{"quiet unknown model", []string{"decide", "quiet", "--config", cfg, "--model", "nope", "--from", "now", "--for", "1h", "--reason", "r"}, 1, "no model"},
		{"end-quiet twice", []string{"decide", "end-quiet", "1", "--config", cfg, "--reason", "r"}, 1, "ended at"},
	}
	for _, tt := range refused {
		t.Run(tt.name, func(t *testing.T) {
			out, errOut, code := runPlumb(t, "", tt.args...)
			if code != tt.code || !strings.Contains(out+errOut, tt.msg) {
				t.Errorf("exit %d, want %d; output %q, want %q", code, tt.code, out+errOut, tt.msg)
			}
		})
	}

	out = mustRun(t, "audit", "verify", "--config", cfg)
	if !strings.Contains(out, "audit trail intact: 6 records") {
		t.Errorf("verify printed %q", out)
	}
	// The printed head, kept apart, checks the end of the trail later.
	head := regexp.MustCompile(`\b6:[0-9a-f]{64}\b`).FindString(out)
	if head == "" {
		t.Fatalf("verify printed no head: %q", out)
	}
	if out := mustRun(t, "audit", "verify", "--config", cfg, "--kept", head); !strings.Contains(out, "kept record 6 is in the trail") {
		t.Errorf("verify --kept printed %q", out)
	}
	forged := head[:len(head)-1] + map[bool]string{true: "0", false: "1"}[head[len(head)-1] != '0']
	if out, _, code := runPlumb(t, "", "audit", "verify", "--config", cfg, "--kept", forged); code != 1 || !strings.Contains(out, "(cut)") {
		t.Errorf("verify --kept with another hash: exit %d, %q", code, out)
	}
	if out, _, code := runPlumb(t, "", "audit", "verify", "--config", cfg, "--kept", "7:"+head[2:]); code != 1 || !strings.Contains(out, "no longer in the trail") {
		t.Errorf("verify --kept past the end: exit %d, %q", code, out)
	}
	if _, _, code := runPlumb(t, "", "audit", "verify", "--config", cfg, "--kept", "x"); code != 2 {
		t.Errorf("verify --kept x: exit %d, want 2", code)
	}

	csvOut := mustRun(t, "audit", "export", "--config", cfg, "--format", "csv")
	rows, err := csv.NewReader(strings.NewReader(csvOut)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	wantActions := []string{"exclude", "reinstate", "exclude", "rebaseline", "quiet_set", "quiet_end"}
	if len(rows) != 7 {
		t.Fatalf("csv has %d rows, want 7", len(rows))
	}
	for i, a := range wantActions {
		if rows[i+1][3] != a || rows[i+1][2] != actor {
			t.Errorf("row %d: %q, want action %s by %s", i+1, rows[i+1], a, actor)
		}
	}
	jsonPath := filepath.Join(t.TempDir(), "trail.json")
	mustRun(t, "audit", "export", "--config", cfg, "--format", "json", "--from", "2000-01-01", "--out", jsonPath)
	b, err := os.ReadFile(jsonPath)
	if err != nil {
		t.Fatal(err)
	}
	var doc store.AuditExport
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Records) != 6 || doc.Records[5].Hash != rows[6][10] {
		t.Errorf("json export: %d records", len(doc.Records))
	}
	if out := mustRun(t, "audit", "export", "--config", cfg, "--to", time.Now().Add(-time.Hour).Format(time.RFC3339)); strings.Count(out, "\n") != 1 {
		t.Errorf("export before any record: %q, want the header only", out)
	}

	// Someone edits a reason in the database: verify fails with exit 1.
	db, err := sqlite.Open(context.Background(), dbPath)
	if err != nil {
		t.Fatal(err)
	}
	for _, q := range []string{"DROP TRIGGER audit_append_only_update", "UPDATE audit SET reason = 'routine' WHERE seq = 3"} {
		if _, err := db.DB().Exec(q); err != nil {
			t.Fatal(err)
		}
	}
	db.Close()
	out, _, code := runPlumb(t, "", "audit", "verify", "--config", cfg)
	if code != 1 || !strings.Contains(out, "BROKEN at record 3 (edited)") || !strings.Contains(out, "records 1 to 2 are intact") {
		t.Errorf("verify after an edit: exit %d, %q", code, out)
	}
}

func TestParseWhen(t *testing.T) {
	now := time.Date(2026, 5, 4, 12, 0, 0, 0, time.UTC)
	tests := []struct {
		in   string
		want time.Time
		bad  bool
	}{
		{"now", now, false},
		{"2026-05-04T10:30:00Z", time.Date(2026, 5, 4, 10, 30, 0, 0, time.UTC), false},
		{"2026-05-04T10:30:00+02:00", time.Date(2026, 5, 4, 8, 30, 0, 0, time.UTC), false},
		{"2026-05-04 10:30", time.Date(2026, 5, 4, 10, 30, 0, 0, time.Local), false},
		{"2026-05-04", time.Date(2026, 5, 4, 0, 0, 0, 0, time.Local), false},
		{"tomorrow", time.Time{}, true},
		{"2026-13-01", time.Time{}, true},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			got, err := parseWhen(tt.in, now)
			if (err != nil) != tt.bad || (!tt.bad && !got.Equal(tt.want)) {
				t.Errorf("parseWhen(%q) = %v, %v; want %v", tt.in, got, err, tt.want)
			}
		})
	}
}

func TestUserToken(t *testing.T) {
	out, errOut, code := runPlumb(t, "", "user", "token", "r.okafor", "--role", "reviewer")
	if code != 0 || len(strings.TrimSpace(out)) != 43 || !strings.Contains(errOut, "role = \"reviewer\"") || !strings.Contains(errOut, "token_sha256 = ") {
		t.Errorf("user token: exit %d, %q, %q", code, out, errOut)
	}
	if _, _, code := runPlumb(t, "", "user", "token", "x", "--role", "admin"); code != 2 {
		t.Errorf("unknown role: exit %d, want 2", code)
	}
}

// history --line shows the decisions recorded on the reading.
func TestHistoryShowsDecisions(t *testing.T) {
	cfg, _ := decideFixture(t)
	actor, err := osActor()
	if err != nil {
		t.Skip(err)
	}
	mustRun(t, "decide", "exclude", "--config", cfg, "--model", "bench", "--row", "runs/a.csv:5", "--reason", "range switch left on")
	out := mustRun(t, "history", "--config", cfg, "bench", "--line", "runs/a.csv:5")
	if !strings.Contains(out, "decision: set aside by "+actor+" on ") || !strings.Contains(out, ": range switch left on") {
		t.Errorf("history --line printed %q", out)
	}
	out = mustRun(t, "history", "--config", cfg, "bench", "--line", "runs/a.csv:6")
	if strings.Contains(out, "decision:") {
		t.Errorf("history of another reading shows a decision: %q", out)
	}
}
