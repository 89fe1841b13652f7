package view

import (
	"context"
	"math"
	"testing"

	"plumb/cmd/plumb/internal/analysis"
	"plumb/engine"
)

// TestResultReadsTheAnalysis checks the read model against the analysis
// it reads: each point's values, measures, verdict and provenance, the
// coefficients, the cutoff lines and the fragility rows.
func TestResultReadsTheAnalysis(t *testing.T) {
	// Invented data: a line with one far reading (the last).
	x := []float64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 30}
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = 2 + 0.5*v + 0.1*math.Sin(float64(i))
	}
	y[len(y)-1] += 6
	m, err := engine.NewModel("y", []string{"x"}, true)
	if err != nil {
		t.Fatal(err)
	}
	cut := engine.DefaultCutoffs()
	a := analysis.Analysis{Model: m, Options: analysis.Options{Cutoffs: cut, Conclusions: engine.DefaultConclusions(),
		Fragility: true, FragilityOptions: engine.FragilityOptions{MaxRemoved: 2}}}
	res, err := a.Run(context.Background(), map[string][]float64{"y": y, "x": x})
	if err != nil {
		t.Fatal(err)
	}
	r := &Result{Result: res, Cutoffs: cut, Row: func(i int) RowRef {
		return RowRef{ID: int64(100 + i), File: "bench.csv", Line: i + 2}
	}}
	pts := r.Points()
	if len(pts) != len(x) {
		t.Fatalf("%d points, want %d", len(pts), len(x))
	}
	suspects := 0
	for i, p := range pts {
		o := res.Influence.Rows[i]
		if p.ID != int64(100+i) || p.File != "bench.csv" || p.Line != i+2 || p.Row != i {
			t.Errorf("point %d provenance %d %s:%d row %d", i, p.ID, p.File, p.Line, p.Row)
		}
		if float64(p.X["x"]) != x[i] || float64(p.Y) != y[i] || float64(p.Fitted) != res.Fit.Fitted[i] {
			t.Errorf("point %d values x %v y %v fitted %v", i, p.X["x"], p.Y, p.Fitted)
		}
		if float64(p.Leverage) != o.Leverage || float64(p.Cook) != o.Cook || float64(p.DFFITS) != o.DFFITS {
			t.Errorf("point %d measures differ from the engine's", i)
		}
		if p.Verdict != string(res.Verdicts[i].Word()) || len(p.Flags) != len(res.Verdicts[i].Flags) {
			t.Errorf("point %d verdict %s with %d flags, want %s with %d", i, p.Verdict, len(p.Flags), res.Verdicts[i].Word(), len(res.Verdicts[i].Flags))
		}
		if p.Verdict == VerdictSuspect {
			suspects++
		}
	}
	if got := r.Count(engine.WordSuspect); got != suspects {
		t.Errorf("Count(suspect) = %d, want %d", got, suspects)
	}
	cs := r.Coefficients()
	if len(cs) != 2 || cs[1].Term != "x" || float64(cs[1].Estimate) != res.Fit.Coef[1].Estimate || float64(cs[1].Upper95) != res.Fit.Coef[1].Upper95 {
		t.Errorf("coefficients %+v", cs)
	}
	l := r.Lines()
	if float64(l.Leverage) != 2*2/12.0 || float64(l.CookAbsolute) != res.Limits.CookAbsolute || float64(l.Alpha) != cut.Alpha {
		t.Errorf("lines %+v", l)
	}
	// Bonferroni critical |t| at n = 12, p = 2: the t(9) quantile at
	// 1 - 0.05/24 (engine.TQuantile, checked against R in the engine).
	if want := engine.TQuantile(1-0.05/24, 9); float64(l.TCritical) != want {
		t.Errorf("t critical %v, want %v", l.TCritical, want)
	}
	f := r.FragilityOf(2, 1)
	if !f.Computed || f.K != 2 || f.Limit != 1 || f.Found != (res.Fragility.Index > 0) || len(f.Rows) != len(res.Fragility.RemovedRows) {
		t.Errorf("fragility %+v from %+v", f, *res.Fragility)
	}
	for k, ref := range f.Rows {
		if want := r.Row(res.Fragility.RemovedRows[k] - 1); ref != want {
			t.Errorf("fragility row %d = %+v, want %+v", k, ref, want)
		}
	}
	if cv := r.Curves(10); len(cv) != 1 || len(cv[0].X) != 11 || float64(cv[0].X[0]) != 1 || float64(cv[0].X[10]) != 30 {
		t.Errorf("curves %+v", cv)
	}
}
