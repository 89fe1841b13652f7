package alerts

import (
	"context"
	"math"
	"strings"
	"testing"
)

// formRefresh is a refresh of model "bench-b" whose Durbin-Watson check
// has been significant streak times in a row (0: it passes); the other
// checks pass. Invented values.
func formRefresh(streak int) FormCondition {
	p := 0.2
	if streak > 0 {
		p = 0.0004
	}
	return FormCondition{Model: "bench-b", Checks: []FormCheck{
		{Check: CheckLackOfFit, Statistic: 1.3, DF: []int{8, 20}, P: 0.29},
		{Check: CheckDurbinWatson, Statistic: 0.92, P: p, Significant: streak > 0, Streak: streak},
		{Check: CheckBreuschPagan, Statistic: math.NaN(), DF: []int{1}, P: math.NaN()},
	}}
}

// TestFormLapseLifecycle: one significant refresh raises nothing; the
// second in a row opens the alert, which names the check, its statistic
// and p, and suggests what to look at with the usual caution; it stays
// open while the check is significant and resolves when it passes.
func TestFormLapseLifecycle(t *testing.T) {
	h := newHarness(t, nil)
	ctx := context.Background()
	if a, err := h.m.Form(ctx, formRefresh(1)); err != nil || a != nil {
		t.Fatalf("first significant refresh: %v, %v; want nothing", a, err)
	}
	a := mustAlert(t)(h.m.Form(ctx, formRefresh(2)))
	if a.Kind != KindFormLapse || a.State != StateOpen || !strings.HasPrefix(a.ID, "fl-") {
		t.Fatalf("alert %s %s %s", a.ID, a.Kind, a.State)
	}
	for _, want := range []string{"Durbin-Watson", "statistic 0.92", "p 0.0004", "2 refreshes in a row", "arrival order", "suggestions"} {
		if !strings.Contains(a.Explanation, want) {
			t.Errorf("explanation lacks %q: %s", want, a.Explanation)
		}
	}
	if !strings.Contains(a.Summary, "Durbin-Watson") || a.Caution != Caution || !strings.Contains(a.Caution, "qualified staff") {
		t.Errorf("summary %q caution %q", a.Summary, a.Caution)
	}
	if len(a.Measures) != 1 || a.Measures[0].Measure != "durbin_watson_p" || a.Measures[0].Cutoff != DefaultFormLevel {
		t.Errorf("measures %+v", a.Measures)
	}
	if a.Form == nil || len(a.Form.Checks) != 3 || a.Form.Level != DefaultFormLevel || a.Form.Checks[1].Next == "" {
		t.Errorf("form detail %+v", a.Form)
	}
	// A restarted daemon counts from 1 again: the open alert stays open.
	if a := mustAlert(t)(h.m.Form(ctx, formRefresh(1))); a.State != StateOpen || a.Count != 2 {
		t.Errorf("still significant: %s count %d", a.State, a.Count)
	}
	a = mustAlert(t)(h.m.Form(ctx, formRefresh(0)))
	if a.State != StateResolved || a.Resolution == nil || !a.Resolution.Auto {
		t.Fatalf("passing again: %s %+v", a.State, a.Resolution)
	}
	if a, err := h.m.Form(ctx, formRefresh(1)); err != nil || a != nil {
		t.Errorf("one significant refresh after resolving: %v, %v; want nothing", a, err)
	}
}

func TestFormRuleValidate(t *testing.T) {
	for _, mut := range []func(*FormRule){
		func(r *FormRule) { r.Level = 0 },
		func(r *FormRule) { r.Level = 1 },
		func(r *FormRule) { r.Refreshes = 0 },
	} {
		r := DefaultRules()
		mut(&r.FormLapse)
		if err := r.Validate(); err == nil || !strings.Contains(err.Error(), "form_lapse") {
			t.Errorf("%+v: %v", r.FormLapse, err)
		}
	}
}
