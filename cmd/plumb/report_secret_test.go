package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumb/store/sqlite"
)

// TestReportNeedsNoRouteSecret: plumb report only reads the state, so a
// webhook route whose signing secret is not in its environment does not
// stop it; plumb run still refuses to start without the secret.
func TestReportNeedsNoRouteSecret(t *testing.T) {
	dir := t.TempDir()
	cfg := `state = "plumb.db"
listen = ""
[[model]]
name = "bench"
folder = "in"
response = "y"
terms = ["x"]
[[route]]
name = "pager"
kind = "webhook"
url = "https://hooks.lab.example/plumb"
secret_env = "PLUMB_TEST_UNSET_SECRET_7"
`
	path := filepath.Join(dir, "plumb.toml")
	if err := os.WriteFile(path, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	db, err := sqlite.Open(context.Background(), filepath.Join(dir, "plumb.db"))
	if err != nil {
		t.Fatal(err)
	}
	db.Close()
	out := filepath.Join(dir, "report.html")
	if _, stderr, code := runPlumb(t, "", "report", "--config", path, "bench", "-o", out); code != 0 {
		t.Fatalf("report without the route's secret: exit %d\n%s", code, stderr)
	}
	if b, err := os.ReadFile(out); err != nil || !strings.Contains(string(b), "bench") {
		t.Errorf("report: %v, %d bytes", err, len(b))
	}
	_, stderr, code := runPlumb(t, "", "run", "--config", path)
	if code == 0 || !strings.Contains(stderr, "PLUMB_TEST_UNSET_SECRET_7") {
		t.Errorf("run without the route's secret: exit %d\n%s\nwant a refusal naming the variable", code, stderr)
	}
}
