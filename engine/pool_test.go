package engine_test

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"testing"

	"plumb/engine"
)

// TestPoolReference checks the poolability F tests against R (Debian's
// r-base-core): anova(common-slope, separate) for the slopes and
// anova(pooled, common-slope) for the intercepts, weighted, on the
// invented stability batches of testdata/reference/pool (written by
// gen_influence.R).
func TestPoolReference(t *testing.T) {
	files, err := filepath.Glob(filepath.Join("..", "testdata", "reference", "pool", "*.json"))
	if err != nil || len(files) != 3 {
		t.Fatalf("want 3 poolability reference files, found %d (%v)", len(files), err)
	}
	type ftest struct {
		F   float64 `json:"f"`
		DF1 int     `json:"df1"`
		DF2 int     `json:"df2"`
		P   float64 `json:"p"`
	}
	verdicts := map[string]string{}
	for _, file := range files {
		var c struct {
			Assay      []float64 `json:"assay"`
			Months     []float64 `json:"months"`
			Batch      []string  `json:"batch"`
			W          []float64 `json:"w"`
			Slopes     ftest     `json:"slopes"`
			Intercepts ftest     `json:"intercepts"`
		}
		b, err := os.ReadFile(file)
		if err != nil {
			t.Fatal(err)
		}
		if err := json.Unmarshal(b, &c); err != nil {
			t.Fatal(err)
		}
		m, err := engine.NewModel("assay", []string{"group(batch)*months"}, true)
		if err != nil {
			t.Fatal(err)
		}
		m.Weight = engine.Weighting{Column: "w"}
		d := engine.Data{Num: map[string][]float64{"assay": c.Assay, "months": c.Months, "w": c.W}, Text: map[string][]string{"batch": c.Batch}}
		res, err := engine.Pool(m, d, 0)
		if err != nil {
			t.Fatalf("%s: %v", file, err)
		}
		check := func(name string, got engine.PoolTest, want ftest) {
			if got.DF1 != want.DF1 || got.DF2 != want.DF2 {
				t.Errorf("%s %s: df %d, %d; R %d, %d", file, name, got.DF1, got.DF2, want.DF1, want.DF2)
			}
			if math.Abs(got.F-want.F) > 1e-9*want.F || math.Abs(got.P-want.P) > 1e-9*want.P {
				t.Errorf("%s %s: F %.17g p %.17g; R F %.17g p %.17g", file, name, got.F, got.P, want.F, want.P)
			}
		}
		check("slopes", res.Slopes, c.Slopes)
		check("intercepts", res.Intercepts, c.Intercepts)
		if res.Levels != 3 || res.Group != "batch" || res.Predictor != "months" {
			t.Errorf("%s: %+v", file, res)
		}
		if res.Alpha != engine.DefaultPoolAlpha {
			t.Errorf("default level %v", res.Alpha)
		}
		verdicts[filepath.Base(file)] = res.Verdict
		// A level below the slope test's p pools where 0.25 did not.
		if res.Verdict == engine.PoolNone {
			lo, err := engine.Pool(m, d, res.Slopes.P/2)
			if err != nil || lo.Verdict == engine.PoolNone {
				t.Errorf("%s: at level %g: %+v, %v", file, res.Slopes.P/2, lo, err)
			}
		}
	}
	want := map[string]string{
		"ketterby_stability_batches.json":      engine.PoolNone,
		"ketterby_stability_common_slope.json": engine.PoolSlopes,
		"ketterby_stability_one_line.json":     engine.PoolAll,
	}
	for f, v := range want {
		if verdicts[f] != v {
			t.Errorf("%s: verdict %q, want %q", f, verdicts[f], v)
		}
	}
}

func TestPoolShape(t *testing.T) {
	m, _ := engine.NewModel("y", []string{"x", "z"}, true)
	_, err := engine.Pool(m, engine.Data{}, 0)
	if !errors.Is(err, engine.ErrPoolShape) {
		t.Errorf("two numeric predictors, no group: %v, want ErrPoolShape", err)
	}
}
