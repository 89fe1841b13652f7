package analysis

import (
	"context"
	"errors"
	"math"
	"reflect"
	"testing"

	"plumb/engine"
)

// cols is invented data: a line with one far point (row 12).
func cols() map[string][]float64 {
	x := []float64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 30}
	y := make([]float64, len(x))
	for i, v := range x {
		y[i] = 2 + 0.5*v + 0.1*math.Sin(float64(i))
	}
	y[len(y)-1] += 6
	return map[string][]float64{"y": y, "x": x}
}

func model(t *testing.T) engine.Model {
	t.Helper()
	m, err := engine.NewModel("y", []string{"x"}, true)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// TestRunIsTheEngineSequence checks that a run gives what the engine's
// functions give when called one after the other, value for value.
func TestRunIsTheEngineSequence(t *testing.T) {
	m, c := model(t), cols()
	conc := engine.DefaultConclusions()
	fopt := engine.FragilityOptions{MaxRemoved: 2}
	a := Analysis{Model: m, Options: Options{
		Cutoffs: engine.DefaultCutoffs(), Conclusions: conc,
		Fragility: true, FragilityOptions: fopt,
		Suggest: true, SuggestOptions: engine.SuggestOptions{Replicates: 2},
		Region: engine.Region{"x": {0, 40}},
	}}
	r, err := a.Run(context.Background(), c)
	if err != nil {
		t.Fatal(err)
	}
	X, y, err := m.Design(c)
	if err != nil {
		t.Fatal(err)
	}
	fit, err := engine.Refit(m, X, y)
	if err != nil {
		t.Fatal(err)
	}
	inf, vs := engine.Assess(fit, engine.DefaultCutoffs())
	fr, err := engine.Fragility(fit, inf, conc, fopt)
	if err != nil {
		t.Fatal(err)
	}
	sg, err := engine.Suggest(fit, inf, vs, engine.Region{"x": {0, 40}}, engine.SuggestOptions{Replicates: 2, Conclusions: conc, Fragility: fopt})
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(r.Fit.Coef, fit.Coef) || !reflect.DeepEqual(r.Verdicts, vs) {
		t.Errorf("fit or verdicts differ from the engine's")
	}
	if !reflect.DeepEqual(r.Influence.Rows, inf.Rows) && !sameNaN(r.Influence.Rows, inf.Rows) {
		t.Errorf("influence rows differ from the engine's")
	}
	if !reflect.DeepEqual(*r.Fragility, fr) {
		t.Errorf("fragility = %+v, want %+v", *r.Fragility, fr)
	}
	if !r.Suggested || !reflect.DeepEqual(r.Suggestions, sg) {
		t.Errorf("suggestions = %+v (suggested %v), want %+v", r.Suggestions, r.Suggested, sg)
	}
	if r.Limits != engine.CutoffLimits(engine.DefaultCutoffs(), fit.N, fit.P) {
		t.Errorf("limits = %+v", r.Limits)
	}
	if len(r.Problems) != 0 {
		t.Errorf("problems %v", r.Problems)
	}
	if w := r.Verdicts[len(vs)-1].Word(); w == engine.WordOrdinary {
		t.Errorf("the far point's verdict is %s", w)
	}
}

func sameNaN(a, b []engine.Obs) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		x, y := reflect.ValueOf(a[i]), reflect.ValueOf(b[i])
		for j := range x.NumField() {
			u, v := x.Field(j).Float(), y.Field(j).Float()
			if u != v && !(math.IsNaN(u) && math.IsNaN(v)) {
				return false
			}
		}
	}
	return true
}

// TestRunErrors: design and refit failures end the run with their step;
// optional steps are asked for only when set.
func TestRunErrors(t *testing.T) {
	m := model(t)
	c := cols()
	c["x"][3] = math.Inf(1)
	_, err := (&Analysis{Model: m, Options: Options{Cutoffs: engine.DefaultCutoffs()}}).Run(context.Background(), c)
	var se *StepError
	var de *engine.DataError
	if !errors.As(err, &se) || se.Step != StepDesign || !errors.As(err, &de) || de.Row != 3 {
		t.Errorf("non-finite x: err = %v, want a design StepError wrapping a DataError at row 3", err)
	}
	few := map[string][]float64{"y": {1, 2}, "x": {1, 2}}
	_, err = (&Analysis{Model: m, Options: Options{Cutoffs: engine.DefaultCutoffs()}}).Run(context.Background(), few)
	if !errors.As(err, &se) || se.Step != StepRefit || !errors.Is(err, engine.ErrTooFewRows) {
		t.Errorf("two rows: err = %v, want a refit StepError wrapping ErrTooFewRows", err)
	}
	r, err := (&Analysis{Model: m, Options: Options{Cutoffs: engine.DefaultCutoffs()}}).Run(context.Background(), cols())
	if err != nil || r.Fragility != nil || r.Suggested || r.Suggestions != nil {
		t.Errorf("no options: %+v, %v; want fit and verdicts only", r, err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := (&Analysis{Model: m}).Run(ctx, cols()); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: err = %v", err)
	}
}

// TestSuggestRegionLeavesSuspectOut: one wrong reading at 150 on a line
// read from 5 to 95 (invented data) is judged suspect; the default
// operating region is the range of the other readings, so no suggestion
// lies beyond 95.
func TestSuggestRegionLeavesSuspectOut(t *testing.T) {
	var x, y []float64
	for v := 5.0; v <= 95; v += 5 {
		x = append(x, v)
		y = append(y, 1+0.2*v+0.05*math.Sin(v))
	}
	x, y = append(x, 150), append(y, 1+0.2*150+12)
	a := Analysis{Model: model(t), Options: Options{
		Cutoffs: engine.DefaultCutoffs(), Conclusions: engine.DefaultConclusions(),
		Fragility: true, FragilityOptions: engine.FragilityOptions{MaxRemoved: 2},
		Suggest: true,
	}}
	r, err := a.Run(context.Background(), map[string][]float64{"x": x, "y": y})
	if err != nil {
		t.Fatal(err)
	}
	if w := r.Verdicts[len(x)-1].Word(); w != engine.WordSuspect {
		t.Fatalf("the reading at 150 is %s, want suspect", w)
	}
	if got := r.Region["x"]; got != [2]float64{5, 95} {
		t.Errorf("region %v, want [5 95]", got)
	}
	if len(r.Suggestions) == 0 {
		t.Fatalf("no suggestion (problems %v)", r.Problems)
	}
	for _, s := range r.Suggestions {
		if at := s.At["x"]; at < 5 || at > 95 {
			t.Errorf("suggestion at x = %v outside [5, 95]: %s", at, s.Text)
		}
	}
}
