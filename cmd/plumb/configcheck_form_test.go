package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestConfigCheckTextTerm: config check reads the first rows of a model's
// file and refuses a text column used as a plain term, suggesting
// group(...); written as group(lot) the same config is valid.
func TestConfigCheckTextTerm(t *testing.T) {
	dir := t.TempDir()
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "in", "a.csv"), []byte("x,lot,y\n1,A,2\n2,B,3\n3,A,4.1\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	cfg := filepath.Join(dir, "p.toml")
	write := func(terms string) {
		src := "state = \"p.db\"\n[[model]]\nname = \"t\"\nfolder = \"in\"\nresponse = \"y\"\nterms = " + terms + "\n"
		if err := os.WriteFile(cfg, []byte(src), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	write(`["x", "lot"]`)
	_, stderr, code := runPlumb(t, "", "config", "check", "--config", cfg)
	if code != 1 || !strings.Contains(stderr, "write group(lot)") || !strings.Contains(stderr, "a.csv:2:3") {
		t.Errorf("plain term: exit %d, stderr %s", code, stderr)
	}
	write(`["x", "group(lot)"]`)
	if _, stderr, code := runPlumb(t, "", "config", "check", "--config", cfg); code != 0 {
		t.Errorf("group(lot): exit %d, stderr %s", code, stderr)
	}
	if err := os.WriteFile(cfg, []byte("state = \"p.db\"\n[[model]]\nname = \"t\"\nfolder = \"in\"\nresponse = \"y\"\nterms = [\"x\"]\nweights = \"inverse(x\"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, stderr, code := runPlumb(t, "", "config", "check", "--config", cfg); code != 1 || !strings.Contains(stderr, "p.toml:7") || !strings.Contains(stderr, "weights") {
		t.Errorf("bad weights: exit %d, stderr %s", code, stderr)
	}
}
