package main

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumb/store"
	"plumb/store/sqlite"
)

// TestStatusFitJSONNull: an undefined number of a stored fit (sigma of an
// exact fit, an estimate of an aliased term) is null in status's JSON,
// as in every JSON plumb writes, and the document still encodes.
func TestStatusFitJSONNull(t *testing.T) {
	f := store.FitRecord{ID: 7, N: 3, Sigma: math.NaN(), RSquared: 1, Terms: []string{"intercept", "dose"},
		Estimates: []float64{1.5, math.Inf(1)}, StdErrors: []float64{math.NaN(), 0.25}, Fragility: -2}
	b, err := json.Marshal(fitOutOf(f))
	if err != nil {
		t.Fatalf("marshal: %v", err)
	}
	for _, want := range []string{`"sigma":null`, `"r_squared":1`, `"estimates":{"dose":null,"intercept":1.5}`, `"std_errors":{"dose":0.25,"intercept":null}`} {
		if !strings.Contains(string(b), want) {
			t.Errorf("status fit JSON %s\nlacks %s", b, want)
		}
	}
}

// TestStatusHistoryLabelsMissing: status counts the rows left out for a
// missing value per model and per file, and history names a row by its
// label (the model's id column) beside file:line.
func TestStatusHistoryLabelsMissing(t *testing.T) {
	dir := t.TempDir()
	cfgPath := filepath.Join(dir, "plumb.toml")
	if err := os.WriteFile(cfgPath, []byte("state = \"s.db\"\nlisten = \"\"\n[[model]]\nname = \"cars\"\nfolder = \"in\"\nresponse = \"mpg\"\nterms = [\"wt\"]\nid_column = \"model\"\nmissing = [\"NA\"]\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	db, err := sqlite.Open(ctx, filepath.Join(dir, "s.db"))
	if err != nil {
		t.Fatal(err)
	}
	_, err = db.Ingest(ctx, store.Batch{
		Source:       store.Source{Model: "cars", Path: "mtcars.csv", Generation: 1, Offset: 120, Line: 4},
		Observations: []store.Observation{{Line: 2, Raw: `"Fiat 128",32.4,2.2`, Label: "Fiat 128", Values: []float64{32.4, 2.2}}},
		Missing:      2,
	})
	db.Close()
	if err != nil {
		t.Fatal(err)
	}
	out, stderr, code := runPlumb(t, "", "status", "--config", cfgPath)
	if code != 0 {
		t.Fatalf("status: exit %d: %s", code, stderr)
	}
	for _, w := range []string{"MISSING", "cars   waiting  1     0            2"} {
		if !strings.Contains(out, w) {
			t.Errorf("status lacks %q:\n%s", w, out)
		}
	}
	out, _, _ = runPlumb(t, "", "status", "--config", cfgPath, "--json")
	if !strings.Contains(out, `"missing": 2`) {
		t.Errorf("status --json lacks the missing count:\n%s", out)
	}
	out, stderr, code = runPlumb(t, "", "history", "--config", cfgPath, "cars", "--line", "mtcars.csv:2")
	if code != 0 || !strings.HasPrefix(out, "mtcars.csv:2 [Fiat 128]  ") {
		t.Errorf("history: exit %d %s\n%s", code, stderr, out)
	}
}
