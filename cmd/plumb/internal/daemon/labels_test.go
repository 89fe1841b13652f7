package daemon

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/view"
)

// TestRowLabels: with id_column, every row keeps the text of that column
// (R's mtcars, the car names written as a column "model"): the view's
// points, a suspect alert's subject, summary and text, and, after a
// restart, the rows read back from the store. Rows with a missing value
// are counted, and the count survives the restart (kept per file by the
// store). Fitted values: R's lm(mpg ~ wt + hp, data = mtcars),
// testdata/rdata/mtcars_lm.json (gen_rdata.R).
func TestRowLabels(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "cars"
folder = "in"
response = "mpg"
terms = ["wt", "hp"]
id_column = "model"
missing = ["NA"]
[model.fragility]
enabled = false
`)
	src, err := os.ReadFile("../../../../testdata/rdata/mtcars.csv")
	if err != nil {
		t.Fatal(err)
	}
	var want struct {
		IDs    []string  `json:"ids"`
		Fitted []float64 `json:"fitted"`
	}
	b, err := os.ReadFile("../../../../testdata/rdata/mtcars_lm.json")
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &want); err != nil {
		t.Fatal(err)
	}
	// Two rows without their mpg: left out and counted.
	src = append(src, "\"Bench Car P\",NA,4,100,90,4,2.5,18,1,1,4,2\n\"Bench Car Q\",NA,4,100,90,4,2.5,18,1,1,4,2\n"...)
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(dir, "in", "mtcars.csv")
	if err := os.WriteFile(file, src, 0o644); err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	r := start(t, c)
	waitFor(t, "a fit of the 32 cars", func() bool {
		f, err := r.d.store.LastFit(ctx, "cars")
		return err == nil && f.N == 32
	})
	var d view.ModelDetail
	waitFor(t, "the view of 32 points", func() bool {
		d, err = r.d.View().Model(ctx, "cars")
		return err == nil && len(d.Points) == 32
	})
	for i, p := range d.Points {
		if p.Label != want.IDs[i] {
			t.Fatalf("point %d: label %q, R's row name %q", i, p.Label, want.IDs[i])
		}
		if math.Abs(float64(p.Fitted)-want.Fitted[i]) > 1e-9*math.Abs(want.Fitted[i]) {
			t.Errorf("%s: fitted %.17g, R %.17g", p.Label, float64(p.Fitted), want.Fitted[i])
		}
	}
	if d.Missing != 2 {
		t.Errorf("missing %d, want 2 (both bench cars lack mpg)", d.Missing)
	}

	// A heavy, powerful car far above the fit: a suspect point.
	f, err := os.OpenFile(file, os.O_APPEND|os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := f.WriteString("\"Test Rig X\",40,8,400,400,3,6,15,0,0,3,4\n"); err != nil {
		t.Fatal(err)
	}
	f.Close()
	subject := alerts.LabeledPointSubject("cars", "mtcars.csv", 36, "Test Rig X")
	waitFor(t, "a suspect alert naming the car", func() bool { return openAlert(t, r.d.store, alerts.KindSuspectPoint, subject) })
	for _, a := range alertsOf(t, r.d.store, alerts.KindSuspectPoint) {
		if a.Subject != subject {
			continue
		}
		for _, w := range []string{`Row \"Test Rig X\", line 36 of mtcars.csv`, `line 36 (row \"Test Rig X\")`, `"label":"Test Rig X"`} {
			if !strings.Contains(a.Doc, w) {
				t.Errorf("alert document lacks %s:\n%s", w, a.Doc)
			}
		}
	}
	r.stop(t)

	// After a restart the rows come back from the store with their labels,
	// and the missing count from the files' counts.
	r = start(t, c)
	defer r.stop(t)
	waitFor(t, "the view after the restart", func() bool {
		d, err = r.d.View().Model(ctx, "cars")
		return err == nil && len(d.Points) == 33
	})
	if d.Points[0].Label != "Mazda RX4" || d.Points[32].Label != "Test Rig X" || d.Missing != 2 {
		t.Errorf("after restart: first %q, last %q, missing %d; want Mazda RX4, Test Rig X, 2", d.Points[0].Label, d.Points[32].Label, d.Missing)
	}
}
