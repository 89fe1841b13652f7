package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestConfigCheckReportsAll: one run of config check reports every
// problem of the file with its line, bad terms of several models
// included, and says where a min_rows below what the model needs is
// raised.
func TestConfigCheckReportsAll(t *testing.T) {
	path := filepath.Join(t.TempDir(), "plumb.toml")
	src := `state = "x.db"
log_level = "loud"

[[model]]
name = "a"
folder = "in"
response = "y"
terms = ["x^", "log(x"]

[[model]]
name = "b"
folder = "in2"
response = "y"
terms = ["x", "x^2"]
min_rows = 2
delimiter = ";;"

[[model]]
name = "c"
folder = "in3"
response = "y"
terms = ["2x"]
`
	if err := os.WriteFile(path, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	stdout, stderr, code := runPlumb(t, "", "config", "check", "--config", path)
	if code != 1 {
		t.Fatalf("exit %d, want 1\n%s%s", code, stdout, stderr)
	}
	for _, want := range []string{
		path + `:2: log_level: bad value`,
		path + `:8: model[1].terms: bad value: engine: term "x^"`,
		`term "log(x"`,
		path + `:16: model[2].delimiter: bad value`,
		path + `:22: model[3].terms: bad value: engine: term "2x"`,
	} {
		if !strings.Contains(stderr, want) {
			t.Errorf("config check does not say %q:\n%s", want, stderr)
		}
	}
	note := `note: ` + path + `:15: model[2].min_rows (model "b"): 2 is too few for 3 coefficients; plumb waits for 5 rows`
	if !strings.Contains(stdout, note) {
		t.Errorf("config check does not say min_rows is raised:\n%s", stdout)
	}
}
