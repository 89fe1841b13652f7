package daemon

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"plumb/engine"
	"plumb/store"
)

// appendFile appends text to path, creating it and its folder.
func appendFile(t testing.TB, path, text string) {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		t.Fatal(err)
	}
	f, err := os.OpenFile(path, os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if _, err := f.WriteString(text); err != nil {
		t.Fatal(err)
	}
}

func relClose(a, b, tol float64) bool {
	return math.Abs(a-b) <= tol*math.Max(math.Abs(b), 1e-12)
}

// TestWeightedModel: a model weighted by inverse(x^2) (an invented
// photometer whose spread grows with the concentration x). A row whose
// weight is not finite (x = 0) is quarantined with file:line:column of
// the x field; the stored fit is engine.Build's weighted fit of the rows,
// and each row's arrival measures (the weighted online update) are those
// of the weighted fit of the rows up to it, before and after a restart.
func TestWeightedModel(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "w"
folder = "in"
response = "y"
terms = ["x"]
weights = "inverse(x^2)"
`)
	rng := rand.New(rand.NewPCG(16, 1))
	file := filepath.Join(dir, "in", "a.csv")
	var b strings.Builder
	b.WriteString("x,y\n")
	var xs, ys []float64
	row := func(x float64) {
		y := 0.02 + 0.5*x*(1+0.03*rng.NormFloat64())
		xs, ys = append(xs, x), append(ys, y)
		fmt.Fprintf(&b, "%g,%.17g\n", x, y)
	}
	for i := 0; i < 30; i++ {
		row(float64(1 + i%10))
	}
	b.WriteString("0,0.01\n") // line 32: weight 1/0^2 is not finite
	row(7.5)
	appendFile(t, file, b.String())
	r := start(t, c)
	ctx := context.Background()
	waitFor(t, "31 rows and a fit of them", func() bool {
		f, err := r.d.store.LastFit(ctx, "w")
		return count(t, r.d.store, "w") == 31 && err == nil && f.N == 31
	})
	q, err := r.d.store.Quarantined(ctx, "w", 0, 10)
	if err != nil || len(q) != 1 {
		t.Fatalf("quarantine %+v, %v", q, err)
	}
	if q[0].Line != 32 || q[0].Column != 1 || !strings.Contains(q[0].Reason, "a.csv:32:1") || !strings.Contains(q[0].Reason, "weight") {
		t.Errorf("quarantined %+v", q[0])
	}
	m, err := engine.NewModel("y", []string{"x"}, true)
	if err != nil {
		t.Fatal(err)
	}
	m.Weight = engine.Weighting{Column: "x", Power: 2}
	want := func(n int) (*engine.Fit, *engine.Influence) {
		ds, err := m.Build(engine.Data{Num: map[string][]float64{"x": xs[:n], "y": ys[:n]}})
		if err != nil {
			t.Fatal(err)
		}
		f, err := ds.Fit()
		if err != nil {
			t.Fatal(err)
		}
		return f, engine.Diagnose(f)
	}
	f, _ := want(31)
	got, _ := r.d.store.LastFit(ctx, "w")
	for j := range f.Coef {
		if !relClose(got.Estimates[j], f.Coef[j].Estimate, 1e-12) || !relClose(got.StdErrors[j], f.Coef[j].StdError, 1e-12) {
			t.Errorf("coefficient %d: %v (se %v), weighted fit %v (se %v)", j, got.Estimates[j], got.StdErrors[j], f.Coef[j].Estimate, f.Coef[j].StdError)
		}
	}
	if !strings.Contains(got.Detail, `"weights":"inverse(x^2)"`) || !strings.Contains(got.Detail, `"durbin_watson"`) {
		t.Errorf("fit detail %s", got.Detail)
	}
	checkArrivals := func(from int) {
		t.Helper()
		obs, err := r.d.store.Observations(ctx, "w", store.ObsQuery{})
		if err != nil {
			t.Fatal(err)
		}
		for i, o := range obs {
			if i < from || o.Arrival == nil {
				continue
			}
			_, inf := want(i + 1)
			w := inf.Rows[i]
			a := o.Arrival
			if !relClose(a.Leverage, w.Leverage, 1e-9) || !relClose(a.CooksDistance, w.Cook, 1e-9) ||
				!relClose(a.StudentizedExternal, w.StudentExternal, 1e-9) || !relClose(a.Residual, w.Residual, 1e-9) {
				t.Errorf("row %d at arrival: h %v D %v t %v e %v; weighted fit: %v %v %v %v", i+1,
					a.Leverage, a.CooksDistance, a.StudentizedExternal, a.Residual, w.Leverage, w.Cook, w.StudentExternal, w.Residual)
			}
		}
	}
	checkArrivals(10)
	d, err := r.d.View().Model(ctx, "w")
	if err != nil || d.Weights != "inverse(x^2)" || d.Form == nil || d.Form.DurbinWatson == nil || !slices.Equal(d.Predictors, []string{"x"}) {
		t.Errorf("model detail weights %q form %+v, %v", d.Weights, d.Form, err)
	}
	r.stop(t)

	// After a restart the online fit is rebuilt with the weights.
	var more strings.Builder
	for i := 0; i < 5; i++ {
		x := float64(2 + i)
		y := 0.02 + 0.5*x*(1+0.03*rng.NormFloat64())
		xs, ys = append(xs, x), append(ys, y)
		fmt.Fprintf(&more, "%g,%.17g\n", x, y)
	}
	appendFile(t, file, more.String())
	r = start(t, c)
	waitFor(t, "36 rows", func() bool { return count(t, r.d.store, "w") == 36 })
	checkArrivals(31)
}

// TestGroupGainsLevel: a model with group(lot) (invented reagent lots A
// and B). A row of a new lot C, once the model is judging, is stored with
// the arrival verdict "new level, not judged" (WordNewLevel); the next
// refresh extends the model (coefficient lot=C in the fit history, with
// "new_levels"), and later rows of lot C are judged. A restart reads the
// labels again from the stored rows.
func TestGroupGainsLevel(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "g"
folder = "in"
response = "y"
terms = ["x", "group(lot)"]
`)
	rng := rand.New(rand.NewPCG(16, 2))
	file := filepath.Join(dir, "in", "a.csv")
	lots := map[string]float64{"A": 0, "B": 0.8, "C": -0.5}
	rows := func(lot string, n int, header bool) string {
		var b strings.Builder
		if header {
			b.WriteString("x,lot,y\n")
		}
		for i := 0; i < n; i++ {
			x := float64(i % 8)
			fmt.Fprintf(&b, "%g,%q,%.6f\n", x, lot, 1+lots[lot]+0.4*x+0.05*rng.NormFloat64())
		}
		return b.String()
	}
	appendFile(t, file, rows("A", 15, true)+rows("B", 15, false))
	r := start(t, c)
	ctx := context.Background()
	waitFor(t, "a fit of 30 rows", func() bool {
		f, err := r.d.store.LastFit(ctx, "g")
		return err == nil && f.N == 30
	})
	if f, _ := r.d.store.LastFit(ctx, "g"); !slices.Equal(f.Terms, []string{"intercept", "x", "lot=B"}) {
		t.Fatalf("terms %v", f.Terms)
	}
	appendFile(t, file, rows("C", 3, false))
	waitFor(t, "a fit with lot C", func() bool {
		f, err := r.d.store.LastFit(ctx, "g")
		return err == nil && f.N == 33
	})
	f, _ := r.d.store.LastFit(ctx, "g")
	if !slices.Equal(f.Terms, []string{"intercept", "x", "lot=B", "lot=C"}) || !strings.Contains(f.Detail, `"new_levels":{"lot":["C"]}`) {
		t.Errorf("after lot C: terms %v, detail %s", f.Terms, f.Detail)
	}
	obs, err := r.d.store.Observations(ctx, "g", store.ObsQuery{AfterID: 30})
	if err != nil || len(obs) != 3 {
		t.Fatalf("%d rows of lot C, %v", len(obs), err)
	}
	for _, o := range obs {
		if o.Arrival == nil || o.Arrival.Verdict != WordNewLevel || !math.IsNaN(o.Arrival.Leverage) {
			t.Errorf("line %d: arrival %+v, want %q with undefined measures", o.Line, o.Arrival, WordNewLevel)
		}
	}
	d, err := r.d.View().Model(ctx, "g")
	if err != nil || len(d.Coefficients) != 4 || d.Coefficients[3].Term != "lot=C" || d.Points[32].Labels["lot"] != "C" || !slices.Equal(d.Predictors, []string{"x"}) {
		t.Errorf("model detail: %v, %+v", err, d.Coefficients)
	}
	appendFile(t, file, rows("C", 2, false))
	waitFor(t, "35 rows", func() bool { return count(t, r.d.store, "g") == 35 })
	obs, _ = r.d.store.Observations(ctx, "g", store.ObsQuery{AfterID: 33})
	for _, o := range obs {
		if o.Arrival == nil || o.Arrival.Verdict == WordNewLevel || len(o.Arrival.DFBETAS) != 4 {
			t.Errorf("line %d after the model gained lot C: arrival %+v", o.Line, o.Arrival)
		}
	}
	r.stop(t)

	appendFile(t, file, rows("B", 2, false))
	r = start(t, c)
	waitFor(t, "37 rows and a fit of them", func() bool {
		f, err := r.d.store.LastFit(ctx, "g")
		return count(t, r.d.store, "g") == 37 && err == nil && f.N == 37
	})
	f, _ = r.d.store.LastFit(ctx, "g")
	if !slices.Equal(f.Terms, []string{"intercept", "x", "lot=B", "lot=C"}) {
		t.Errorf("after restart: terms %v", f.Terms)
	}
	obs, _ = r.d.store.Observations(ctx, "g", store.ObsQuery{AfterID: 35})
	for _, o := range obs {
		if o.Arrival == nil || len(o.Arrival.DFBETAS) != 4 {
			t.Errorf("line %d after restart: arrival %+v", o.Line, o.Arrival)
		}
	}
}

// TestFormLapseAlert: a line fitted to a curve with repeated settings
// (invented) fails the lack-of-fit test; the form_lapse alert opens only
// on the second significant refresh in a row, and resolves once the
// window holds data a line describes.
func TestFormLapseAlert(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "f"
folder = "in"
response = "y"
terms = ["x"]
[model.window]
rows = 36
[model.fragility]
enabled = false
`)
	rng := rand.New(rand.NewPCG(16, 3))
	file := filepath.Join(dir, "in", "a.csv")
	curve := func(n int, header bool) string {
		var b strings.Builder
		if header {
			b.WriteString("x,y\n")
		}
		for i := 0; i < n; i++ {
			x := float64(1 + i%6)
			fmt.Fprintf(&b, "%g,%.6f\n", x, x*x+0.05*rng.NormFloat64())
		}
		return b.String()
	}
	line := func(n int) string {
		var b strings.Builder
		for i := 0; i < n; i++ {
			x := float64(1 + rng.IntN(6))
			fmt.Fprintf(&b, "%g,%.6f\n", x, 2+0.5*x+0.05*rng.NormFloat64())
		}
		return b.String()
	}
	ctx := context.Background()
	var r *running
	open := func() []store.AlertRecord {
		as, err := r.d.store.Alerts(ctx, store.AlertQuery{Model: "f", Kind: "form_lapse"})
		if err != nil {
			t.Fatal(err)
		}
		return as
	}
	appendFile(t, file, curve(24, true))
	r = start(t, c)
	waitFor(t, "a first fit", func() bool {
		n, err := r.d.store.CountFits(ctx, "f")
		return err == nil && n >= 1
	})
	if f, _ := r.d.store.LastFit(ctx, "f"); !strings.Contains(f.Detail, `"lack_of_fit":{"groups":6`) {
		t.Fatalf("first fit detail %s", f.Detail)
	}
	if as := open(); len(as) != 0 {
		t.Fatalf("one significant refresh opened %+v", as)
	}
	appendFile(t, file, curve(6, false))
	waitFor(t, "form_lapse open", func() bool {
		as := open()
		return len(as) == 1 && as[0].State == "open"
	})
	doc := open()[0].Doc
	for _, want := range []string{"lack of fit", "adding a term", "qualified staff"} {
		if !strings.Contains(doc, want) {
			t.Errorf("alert lacks %q: %s", want, doc)
		}
	}
	appendFile(t, file, line(40))
	waitFor(t, "form_lapse resolved", func() bool {
		as := open()
		return len(as) == 1 && as[0].State == "resolved"
	})
}

// TestTextColumnAsTerm: a text column used as a plain term quarantines
// its rows with the suggestion to write group(...).
func TestTextColumnAsTerm(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "t"
folder = "in"
response = "y"
terms = ["x", "lot"]
`)
	appendFile(t, filepath.Join(dir, "in", "a.csv"), "x,lot,y\n1,A,2\n2,B,3\n")
	r := start(t, c)
	ctx := context.Background()
	waitFor(t, "two rows quarantined", func() bool {
		q, _ := r.d.store.Quarantined(ctx, "t", 0, 10)
		return len(q) == 2
	})
	q, _ := r.d.store.Quarantined(ctx, "t", 0, 10)
	if !strings.Contains(q[0].Reason, "write group(lot)") || q[0].Line != 2 || q[0].Column != 3 {
		t.Errorf("quarantined %+v", q[0])
	}
}

// TestGroupLeavesWindow: in a windowed model a lot whose rows have all
// left the window drops out of the fit (no column of zeros) and the
// model goes on judging.
func TestGroupLeavesWindow(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "gw"
folder = "in"
response = "y"
terms = ["x", "group(lot)"]
[model.window]
rows = 20
[model.fragility]
enabled = false
`)
	rng := rand.New(rand.NewPCG(16, 4))
	file := filepath.Join(dir, "in", "a.csv")
	rows := func(lot string, shift float64, n int, header bool) string {
		var b strings.Builder
		if header {
			b.WriteString("x,lot,y\n")
		}
		for i := 0; i < n; i++ {
			x := float64(i % 7)
			fmt.Fprintf(&b, "%g,%s,%.6f\n", x, lot, 1+shift+0.4*x+0.05*rng.NormFloat64())
		}
		return b.String()
	}
	appendFile(t, file, rows("A", 0, 10, true)+rows("B", 0.5, 10, false))
	r := start(t, c)
	ctx := context.Background()
	waitFor(t, "a fit with lots A and B", func() bool {
		f, err := r.d.store.LastFit(ctx, "gw")
		return err == nil && f.N == 20 && slices.Contains(f.Terms, "lot=B")
	})
	appendFile(t, file, rows("B", 0.5, 10, false)+rows("C", -0.3, 10, false))
	waitFor(t, "a fit of lots B and C", func() bool {
		f, err := r.d.store.LastFit(ctx, "gw")
		return err == nil && f.N == 20 && slices.Equal(f.Terms, []string{"intercept", "x", "lot=C"})
	})
	st, err := r.d.store.ModelStates(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range st {
		if s.Model == "gw" && s.State != stateJudging {
			t.Errorf("state %s: %s", s.State, s.Reason)
		}
	}
}

// TestGroupDriftByName: a group model's drift baseline is the fit of its
// first rows with their levels. Drift compares coefficients by name, and
// not those a new reference level changes the meaning of (a lot A that
// sorts first becomes the reference: the intercept and lot=C now measure
// against A), so a new lot raises no drift alert by itself.
func TestGroupDriftByName(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "gd"
folder = "in"
response = "y"
terms = ["x", "group(lot)"]
[model.fragility]
enabled = false
[model.alerts.drift]
baseline_rows = 20
`)
	rng := rand.New(rand.NewPCG(16, 5))
	file := filepath.Join(dir, "in", "a.csv")
	rows := func(lot string, shift float64, n int, header bool) string {
		var b strings.Builder
		if header {
			b.WriteString("x,lot,y\n")
		}
		for i := 0; i < n; i++ {
			x := float64(i % 7)
			fmt.Fprintf(&b, "%g,%s,%.6f\n", x, lot, 1+shift+0.4*x+0.05*rng.NormFloat64())
		}
		return b.String()
	}
	appendFile(t, file, rows("B", 0, 12, true)+rows("C", 0.5, 12, false))
	r := start(t, c)
	ctx := context.Background()
	waitFor(t, "a fit of 24 rows", func() bool {
		f, err := r.d.store.LastFit(ctx, "gd")
		return err == nil && f.N == 24
	})
	appendFile(t, file, rows("A", -0.2, 12, false))
	waitFor(t, "a fit with lot A", func() bool {
		f, err := r.d.store.LastFit(ctx, "gd")
		return err == nil && f.N == 36
	})
	appendFile(t, file, rows("B", 0, 5, false))
	waitFor(t, "a fit of 41 rows", func() bool {
		f, err := r.d.store.LastFit(ctx, "gd")
		return err == nil && f.N == 41
	})
	f, _ := r.d.store.LastFit(ctx, "gd")
	if !slices.Equal(f.Terms, []string{"intercept", "x", "lot=B", "lot=C"}) {
		t.Fatalf("terms %v", f.Terms)
	}
	as, err := r.d.store.Alerts(ctx, store.AlertQuery{Model: "gd", Kind: "drift"})
	if err != nil {
		t.Fatal(err)
	}
	for _, a := range as {
		if a.State == "open" {
			t.Errorf("drift alert: %s", a.Doc)
		}
	}
}

func TestMovedByReference(t *testing.T) {
	m, err := engine.NewModel("y", []string{"x", "z", "group(lot)", "x*group(lot)"}, true)
	if err != nil {
		t.Fatal(err)
	}
	base := m.WithLevels("lot", "B", "C")
	if got := movedByReference(base, base.WithLevels("lot", "D")); got != nil {
		t.Errorf("same reference: %v", got)
	}
	cur := base.WithLevels("lot", "A")
	got := movedByReference(base, cur)
	var names []string
	for n := range got {
		names = append(names, n)
	}
	slices.Sort(names)
	want := []string{"intercept", "lot=B", "lot=C", "x", "x*lot=B", "x*lot=C"}
	if !slices.Equal(names, want) {
		t.Errorf("moved %v, want %v (z keeps its meaning)", names, want)
	}
}
