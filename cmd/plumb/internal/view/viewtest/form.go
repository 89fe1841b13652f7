package viewtest

import (
	"context"

	"plumb/cmd/plumb/internal/analysis"
	"plumb/cmd/plumb/internal/view"
	"plumb/engine"
)

// DemoForm returns the Demo with the checks of the model form on
// "bench-b" (computed by the analysis on DemoX, DemoY weighted by
// inverse(ref_kpa)), judged at level 0.01, and a poolability verdict of
// an invented three-batch study.
func DemoForm() *Fake {
	f := Demo()
	d, err := f.Model(context.Background(), "bench-b")
	if err != nil {
		panic("viewtest: " + err.Error())
	}
	m, err := engine.NewModel("output_mv", []string{"ref_kpa"}, true)
	if err != nil {
		panic("viewtest: " + err.Error())
	}
	m.Weight = engine.Weighting{Column: "ref_kpa", Power: 1}
	a := analysis.Analysis{Model: m, Options: analysis.Options{Cutoffs: engine.DefaultCutoffs(), Form: true}}
	res, err := a.Run(context.Background(), map[string][]float64{"output_mv": DemoY, "ref_kpa": DemoX})
	if err != nil {
		panic("viewtest: " + err.Error())
	}
	d.Form, d.FormLevel, d.Weights = view.FormOf(res.Form), 0.01, m.Weight.String()
	d.Pool = view.PoolOf(&engine.Poolability{Group: "batch", Predictor: "months", Levels: 3, Alpha: 0.25,
		Slopes:     engine.PoolTest{F: 0.61, DF1: 2, DF2: 12, P: 0.56},
		Intercepts: engine.PoolTest{F: 7.9, DF1: 2, DF2: 14, P: 0.005},
		Verdict:    engine.PoolSlopes})
	f.SetModel(d)
	return f
}
