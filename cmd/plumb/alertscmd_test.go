package main

import (
	"context"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumb/store/sqlite"
)

// ackConfig writes a config with one model and the given listen address
// and creates its state database.
func ackConfig(t *testing.T, listen string) string {
	t.Helper()
	dir := t.TempDir()
	cfg := `state = "plumb.db"
listen = "` + listen + `"
[[model]]
name = "bench"
folder = "in"
response = "y"
terms = ["x"]
`
	path := filepath.Join(dir, "plumb.toml")
	if err := os.WriteFile(path, []byte(cfg), 0o644); err != nil {
		t.Fatal(err)
	}
	db, err := sqlite.Open(context.Background(), filepath.Join(dir, "plumb.db"))
	if err != nil {
		t.Fatal(err)
	}
	db.Close()
	return path
}

// TestAlertActionErrors: a wrong command line, an unknown id and a
// resolved alert are each said in one plain line, offline and through a
// running daemon (whose JSON error body is not shown raw).
func TestAlertActionErrors(t *testing.T) {
	offline := ackConfig(t, "")
	daemon := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		if strings.Contains(r.URL.Path, "sp-1111111111111111") {
			w.WriteHeader(http.StatusConflict)
			w.Write([]byte(`{"error":"alert sp-1111111111111111 is already resolved; nothing was changed"}`))
			return
		}
		w.WriteHeader(http.StatusNotFound)
		w.Write([]byte(`{"error":"view: not found"}`))
	}))
	defer daemon.Close()
	online := ackConfig(t, strings.TrimPrefix(daemon.URL, "http://"))

	tests := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"bad flag", []string{"ack", "--nope"}, 2, `plumb: ack: flag provided but not defined: -nope (see "plumb ack --help")`},
		{"bad flag value", []string{"resolve", "--config"}, 2, `plumb: resolve: flag needs an argument: -config (see "plumb resolve --help")`},
		{"no id", []string{"ack", "--config", offline}, 2, `plumb: ack: name one alert id (the ID column of plumb alerts) (see "plumb ack --help")`},
		{"unknown id offline", []string{"ack", "--config", offline, "sp-0000000000000000"}, 1,
			`plumb: no alert has the id "sp-0000000000000000"; plumb alerts --state all lists them`},
		{"unknown id through the daemon", []string{"ack", "--config", online, "sp-0000000000000000"}, 1,
			`plumb: no alert has the id "sp-0000000000000000"; plumb alerts --state all lists them`},
		{"resolved through the daemon", []string{"ack", "--config", online, "sp-1111111111111111"}, 1,
			`plumb: alert sp-1111111111111111 is already resolved; nothing was changed`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, stderr, code := runPlumb(t, "", tc.args...)
			if code != tc.code || strings.TrimRight(stderr, "\n") != tc.want {
				t.Errorf("exit %d, stderr:\n%s\nwant exit %d and the one line\n%s", code, stderr, tc.code, tc.want)
			}
		})
	}
	// --help still prints the help.
	_, stderr, code := runPlumb(t, "", "ack", "--help")
	if code != 0 || !strings.Contains(stderr, "Usage: plumb ack") {
		t.Errorf("--help: exit %d\n%s", code, stderr)
	}
}
