package web

import (
	"math"
	"regexp"
	"testing"

	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

// Undefined diagnostics (leverage 1 gives NaN residuals; n = p + 1 leaves
// no Bonferroni cutoff) must never reach the SVG as NaN coordinates.
func TestModelPageUndefinedValues(t *testing.T) {
	nan := view.NaN()
	inf := view.Float(math.Inf(1))
	d := view.ModelDetail{
		ModelSummary: view.ModelSummary{Name: "edge", State: view.StateJudging, Response: "y",
			Terms: []string{"intercept", "x"}, Predictors: []string{"x"}, MaxCook: nan},
		N: 3, P: 2, Sigma: nan, RSquared: 1,
		Cutoffs: view.Cutoffs{Leverage: 4.0 / 3, CookAbsolute: nan, CookSizeAdjusted: 4.0 / 3, TCritical: nan, Alpha: 0.05},
		Points: []view.Point{
			{Row: 0, X: map[string]view.Float{"x": 1}, Y: 2, Fitted: 2, Leverage: 1, StudentizedExternal: nan, Cook: nan, Verdict: view.VerdictOrdinary},
			{Row: 1, X: map[string]view.Float{"x": 2}, Y: 4, Fitted: 4, Leverage: 0.5, StudentizedExternal: inf, Cook: inf, Verdict: view.VerdictNotable},
			{Row: 2, X: map[string]view.Float{"x": nan}, Y: nan, Leverage: 0.5, StudentizedExternal: 0, Cook: 0, Verdict: ""},
		},
		Curves:      []view.Curve{{Predictor: "x", X: []view.Float{1, 2}, Y: []view.Float{2, nan}, Lower: []view.Float{nan, nan}, Upper: []view.Float{inf, 1}}},
		Suggestions: []view.Suggestion{{At: map[string]view.Float{"x": nan}, Text: "n/a"}},
		Drift:       []view.DriftBand{{Term: "x", Baseline: nan, Lower: nan, Upper: nan}},
	}
	src := viewtest.New()
	src.SetModel(d)
	src.AddFit("edge", view.FitView{Terms: []string{"intercept", "x"}, Estimates: []view.Float{nan, 1}, StdErrors: []view.Float{nan, inf}})
	src.AddFit("edge", view.FitView{Terms: []string{"intercept", "x"}, Estimates: []view.Float{0, 2}, StdErrors: []view.Float{1, nan}})
	h := New(src, Options{})
	w := serve(t, h, call{method: "GET", path: "/models/edge"})
	if w.Code != 200 {
		t.Fatalf("status %d: %s", w.Code, w.Body.String())
	}
	bad := regexp.MustCompile(`(?i)="[^"]*\b(nan|[+-]?inf)\b[^"]*"`)
	if loc := bad.FindStringIndex(w.Body.String()); loc != nil {
		m := w.Body.String()[max(0, loc[0]-120):loc[1]]
		t.Errorf("non-finite value in markup: %s", m)
	}
	// The JSON of the same model carries null for them.
	w = serve(t, h, call{method: "GET", path: "/api/v1/models/edge"})
	if w.Code != 200 {
		t.Fatalf("api status %d: %s", w.Code, w.Body.String())
	}
}
