package daemon

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// TestMissingValuesLeftOut: with missing = ["NA"], R's airquality is read
// by the daemon as 111 rows with 42 left out for a missing value (none
// quarantined), and its fit is R's lm fit with na.omit (reference values
// from R, testdata/rdata/airquality_lm.json, gen_rdata.R).
func TestMissingValuesLeftOut(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "ozone"
folder = "in"
response = "Ozone"
terms = ["Solar.R", "Wind", "Temp"]
missing = ["NA"]
[model.fragility]
enabled = false
`)
	src, err := os.ReadFile("../../../../testdata/rdata/airquality.csv")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "in", "airquality.csv"), src, 0o644); err != nil {
		t.Fatal(err)
	}
	var want struct {
		N        int       `json:"n"`
		Omitted  int       `json:"omitted"`
		Estimate []float64 `json:"estimate"`
	}
	b, err := os.ReadFile("../../../../testdata/rdata/airquality_lm.json")
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &want); err != nil {
		t.Fatal(err)
	}
	r := start(t, c)
	waitFor(t, "a fit of 111 rows", func() bool {
		f, err := r.d.store.LastFit(context.Background(), "ozone")
		return err == nil && f.N == want.N
	})
	m := r.d.models["ozone"]
	m.mu.Lock()
	missing := m.missing
	m.mu.Unlock()
	q, err := r.d.store.CountQuarantined(context.Background(), "ozone")
	if err != nil {
		t.Fatal(err)
	}
	if missing != int64(want.Omitted) || q != 0 || count(t, r.d.store, "ozone") != int64(want.N) {
		t.Errorf("missing %d, quarantined %d, stored %d; want %d, 0, %d", missing, q, count(t, r.d.store, "ozone"), want.Omitted, want.N)
	}
	f, err := r.d.store.LastFit(context.Background(), "ozone")
	if err != nil {
		t.Fatal(err)
	}
	for i, e := range f.Estimates {
		if math.Abs(e-want.Estimate[i]) > 1e-9*math.Abs(want.Estimate[i]) {
			t.Errorf("%s = %.17g, R %.17g", f.Terms[i], e, want.Estimate[i])
		}
	}
}
