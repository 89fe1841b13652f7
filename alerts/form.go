package alerts

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"strings"
)

// The form_lapse alert: the model form stops holding.
//
// At each refresh the daemon reports the checks of the model form it
// could make (FormCondition): for each, the statistic, its p-value and
// how many refreshes in a row it has been significant at the rule's
// Level (its streak). The alert opens when some check has been
// significant on Refreshes consecutive refreshes (2 by default, so that
// one noisy fit does not page), stays open while some check is still
// significant, and resolves when every check passes again.

// Defaults of the form_lapse rule.
const (
	DefaultFormLevel     = 0.01
	DefaultFormRefreshes = 2
)

// The checks of the model form, as FormCheck.Check names them.
const (
	CheckLackOfFit    = "lack_of_fit"
	CheckDurbinWatson = "durbin_watson"
	CheckBreuschPagan = "breusch_pagan"
)

// FormRule configures form_lapse alerts: a check is significant when its
// p-value is below Level; the alert opens after Refreshes consecutive
// significant refreshes.
type FormRule struct {
	Rule
	Level     float64 `toml:"level" json:"level"`
	Refreshes int     `toml:"refreshes" json:"refreshes"`
}

func (r FormRule) validate() error {
	if err := r.Rule.validate("rules.form_lapse"); err != nil {
		return err
	}
	if !(r.Level > 0 && r.Level < 1) {
		return cfgErr("rules.form_lapse", "level", ErrInvalid, "%v (want a level strictly between 0 and 1)", r.Level)
	}
	if r.Refreshes < 1 {
		return cfgErr("rules.form_lapse", "refreshes", ErrInvalid, "%d (want 1 or more)", r.Refreshes)
	}
	return nil
}

// FormCheck is one check of the model form at a refresh. Streak counts
// the consecutive refreshes, this one included, on which it was
// significant at the rule's level (0 when it is not now); the daemon
// keeps it. DF holds the degrees of freedom of the statistic (two for
// an F, one for a chi-square, none for Durbin-Watson).
type FormCheck struct {
	Check       string
	Statistic   float64
	DF          []int
	P           float64
	Significant bool
	Streak      int
	// Next is what a person usually does about it (set by the Manager
	// when empty).
	Next string
}

type formCheckJSON struct {
	Check       string     `json:"check"`
	Statistic   jsonNumber `json:"statistic"`
	DF          []int      `json:"df,omitempty"`
	P           jsonNumber `json:"p"`
	Significant bool       `json:"significant"`
	Streak      int        `json:"streak"`
	Next        string     `json:"next,omitempty"`
}

// MarshalJSON writes the check with non-finite numbers as null.
func (c FormCheck) MarshalJSON() ([]byte, error) {
	return json.Marshal(formCheckJSON{c.Check, jsonNumber(c.Statistic), c.DF, jsonNumber(c.P), c.Significant, c.Streak, c.Next})
}

// UnmarshalJSON reads null numbers as NaN.
func (c *FormCheck) UnmarshalJSON(b []byte) error {
	var j formCheckJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return err
	}
	*c = FormCheck{j.Check, float64(j.Statistic), j.DF, float64(j.P), j.Significant, j.Streak, j.Next}
	return nil
}

// FormCondition is the checks of one refresh. Weights names the fit's
// weighting ("" unweighted).
type FormCondition struct {
	Model   string
	Checks  []FormCheck
	Weights string
}

// FormDetail is the detail of a form_lapse alert.
type FormDetail struct {
	Level     float64     `json:"level"`
	Refreshes int         `json:"refreshes"`
	Weights   string      `json:"weights,omitempty"`
	Checks    []FormCheck `json:"checks"`
}

// Form reports the checks of the model form of a refresh. The model's
// form_lapse alert opens when a check's Streak reaches the rule's
// Refreshes, stays open while any check is significant, and resolves
// when none is.
func (m *Manager) Form(ctx context.Context, c FormCondition) (*Alert, error) {
	m.mu.Lock()
	defer m.mu.Unlock()
	if err := m.load(ctx); err != nil {
		return nil, err
	}
	rule := m.rules(c.Model).FormLapse
	_, open := m.open[ID(c.Model, KindFormLapse, c.Model)]
	active := false
	for _, k := range c.Checks {
		if k.Significant && (open || k.Streak >= rule.Refreshes) {
			active = true
		}
	}
	return m.apply(ctx, m.cfg.Now(), change{
		model: c.Model, kind: KindFormLapse, subject: c.Model, active: active,
		note: "every check of the model form passes again",
		fill: func(a *Alert) { fillForm(a, c, rule) },
	})
}

// FormCheckWords names a check in words.
func FormCheckWords(check string) string {
	switch check {
	case CheckLackOfFit:
		return "lack of fit"
	case CheckDurbinWatson:
		return "Durbin-Watson"
	case CheckBreuschPagan:
		return "Breusch-Pagan"
	}
	return check
}

// formNext is what a person usually does about a significant check.
func formNext(check string) string {
	switch check {
	case CheckLackOfFit:
		return "consider adding a term (a power, a product or a group) and compare the fits"
	case CheckDurbinWatson:
		return "look at the residuals in arrival order for runs, steps or a drift (a change of instrument, batch or day)"
	case CheckBreuschPagan:
		return "consider weighting the fit (weights = \"inverse(x)\" or \"inverse(x^2)\", or measured variances)"
	}
	return ""
}

// formWhat says what a significant check means.
func formWhat(check string) string {
	switch check {
	case CheckLackOfFit:
		return "the means at repeated settings depart from the fitted curve more than the repeats scatter"
	case CheckDurbinWatson:
		return "neighbouring residuals in arrival order move together, so the errors do not look independent"
	case CheckBreuschPagan:
		return "the spread of the residuals changes with the terms, so the variance does not look constant"
	}
	return "the check is significant"
}

func fillForm(a *Alert, c FormCondition, rule FormRule) {
	checks := append([]FormCheck{}, c.Checks...)
	a.Measures = nil
	var found, next []string
	for i := range checks {
		k := &checks[i]
		if k.Next == "" {
			k.Next = formNext(k.Check)
		}
		if !k.Significant {
			continue
		}
		a.Measures = append(a.Measures, Measure{Measure: k.Check + "_p", Family: "test", Value: k.P, Cutoff: rule.Level})
		df := ""
		if len(k.DF) > 0 {
			parts := make([]string, len(k.DF))
			for j, d := range k.DF {
				parts[j] = fmt.Sprint(d)
			}
			df = " on " + strings.Join(parts, " and ") + " degrees of freedom"
		}
		found = append(found, fmt.Sprintf("%s: statistic %s%s, p %s (below %s; %d %s in a row): %s",
			FormCheckWords(k.Check), fmtNum(k.Statistic), df, fmtP(k.P), fmtNum(rule.Level), k.Streak, plural(k.Streak, "refresh", "refreshes"), formWhat(k.Check)))
		next = append(next, k.Next)
	}
	a.Form = &FormDetail{Level: rule.Level, Refreshes: rule.Refreshes, Weights: c.Weights, Checks: checks}
	names := make([]string, 0, len(a.Measures))
	for _, k := range checks {
		if k.Significant {
			names = append(names, FormCheckWords(k.Check))
		}
	}
	a.Summary = fmt.Sprintf("The form of model %s no longer holds (%s).", c.Model, strings.Join(names, ", "))
	var b strings.Builder
	b.WriteString("Every verdict plumb gives rests on the model form: the right terms, independent errors, constant variance. ")
	b.WriteString(strings.Join(found, ". "))
	b.WriteString(". What people usually do next (suggestions, not instructions): ")
	b.WriteString(strings.Join(next, "; "))
	b.WriteString(". Until the form holds again, treat outlier and influence verdicts on this model with care.")
	a.Explanation = b.String()
}

// fmtP writes a p-value.
func fmtP(p float64) string {
	if !math.IsNaN(p) && p < 1e-300 {
		return "< 1e-300"
	}
	return fmtNum(p)
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}
