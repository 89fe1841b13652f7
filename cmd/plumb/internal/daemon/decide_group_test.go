package daemon

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/view"
)

// A reading set aside in a model with a group term stays out of the
// online fit that judges arrivals when the model gains a level (the
// online fit is rebuilt from the rows held) and when it is reseeded;
// the rows of the new level are judged against that fit. Invented data.
func TestExcludeSurvivesNewLevel(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "g"
folder = "in"
response = "y"
terms = ["x", "group(lot)"]
`)
	file := filepath.Join(dir, "in", "a.csv")
	var b strings.Builder
	b.WriteString("x,lot,y\n")
	noise := []float64{0.03, -0.02, 0.01, -0.04, 0.02, 0.00, -0.01, 0.04, -0.03, 0.02}
	for i := 0; i < 30; i++ {
		lot, off := "A", 0.0
		if i%2 == 1 {
			lot, off = "B", 0.8
		}
		x := float64(i % 10)
		fmt.Fprintf(&b, "%g,%s,%.4f\n", x, lot, 1+off+0.4*x+noise[i%10])
	}
	b.WriteString("9,A,12\n") // line 32: far off (expected 4.6)
	appendFile(t, file, b.String())

	r := start(t, c)
	v := r.d.View().(viewSource)
	model := func() view.ModelDetail {
		d, err := v.Model(ctx, "g")
		if err != nil {
			t.Fatal(err)
		}
		return d
	}
	waitFor(t, "a fit of 31 rows", func() bool { return model().N == 31 })
	if _, err := v.Exclude(ctx, "g", view.RowKey{Line: "a.csv:32"}, "r.okafor", "sensor knocked", ""); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "the fit without it", func() bool { return model().N == 30 })
	onlineMatches := func() bool {
		m := r.d.models["g"]
		m.mu.Lock()
		defer m.mu.Unlock()
		if m.ref.res == nil || m.online.N() != m.ref.res.Fit.N || len(m.ref.res.Fit.Coef) != m.spec.P() {
			return false
		}
		coef := m.online.Coef(nil)
		for i, c := range m.ref.res.Fit.Coef {
			if math.Abs(coef[i]-c.Estimate) > 1e-9*math.Max(1, math.Abs(c.Estimate)) {
				return false
			}
		}
		return true
	}
	waitFor(t, "the online fit without it", onlineMatches)

	var more strings.Builder
	for i := 0; i < 4; i++ {
		x := float64(2 * i)
		fmt.Fprintf(&more, "%g,C,%.4f\n", x, 0.5+0.4*x+noise[i])
	}
	appendFile(t, file, more.String())
	waitFor(t, "a fit with lot C, still without the reading set aside", func() bool {
		d := model()
		return d.N == 34 && len(d.Coefficients) == 4 && len(d.SetAside) == 1
	})
	waitFor(t, "the online fit with lot C and without it", onlineMatches)
}
