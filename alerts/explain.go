package alerts

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"plumb/engine"
)

// Caution is carried by every alert document.
const Caution = engine.Caution

// describe renders one crossed measure: an engine measure as the engine
// words its flags (engine.Flag.Text), e.g. "Cook's distance 3.42, above 1
// (absolute cutoff)".
func describe(m Measure) string { return engine.Flag(m).Text() }

func describeAll(ms []Measure, keep func(Measure) bool) string {
	var parts []string
	for _, m := range ms {
		if keep(m) {
			parts = append(parts, describe(m))
		}
	}
	return strings.Join(parts, "; ")
}

func fillPoint(a *Alert, c PointCondition, rule PointRule) {
	a.Point = &PointDetail{File: c.File, Line: c.Line, Label: c.Label, Values: c.Values}
	a.Measures = append([]Measure{}, c.Measures...)
	a.Suggestion = c.Suggestion
	a.Summary = fmt.Sprintf("Line %d of %s (model %s) is an outlier that also moves the fit.", c.Line, c.File, c.Model)
	row := ""
	if c.Label != "" {
		a.Summary = fmt.Sprintf("Row %s, line %d of %s (model %s), is an outlier that also moves the fit.", strconv.Quote(c.Label), c.Line, c.File, c.Model)
		row = " (row " + strconv.Quote(c.Label) + ")"
	}
	test := describeAll(c.Measures, func(m Measure) bool { return m.Measure == testMeasure(rule.Test) })
	if test == "" {
		test = "the outlier test flags it"
	}
	infl := describeAll(c.Measures, func(m Measure) bool { return contains(rule.Influence, m.Measure) })
	if infl == "" {
		infl = "the influence measures flag it"
	}
	var b strings.Builder
	fmt.Fprintf(&b, "The row newly read from %s, line %d%s, lies far from what the rest of the data predict (%s), ", c.File, c.Line, row, test)
	fmt.Fprintf(&b, "and it pulls the fitted model toward itself (%s). ", infl)
	b.WriteString("A single row that is both unusual and influential can shift the coefficients and every prediction made " +
		"with this model. If it comes from a recording, sample or instrument error, results computed with the current fit " +
		"are biased; if it is genuine, the model may be missing something in this region.")
	if c.Suggestion != nil && c.Suggestion.Text != "" {
		b.WriteString(" More data near the suggested point would show which.")
	}
	a.Explanation = b.String()
}

func fillFragility(a *Alert, c FragilityCondition, rule FragilityRule) {
	a.Fragility = &FragilityDetail{Index: c.Index, Limit: rule.Limit, Removed: append([]string{}, c.Removed...),
		Conclusion: c.Conclusion, Before: c.Before, After: c.After}
	a.Measures = []Measure{{Measure: "fragility_index", Value: float64(c.Index), Cutoff: float64(rule.Limit)}}
	a.Suggestion = c.Suggestion
	rows := "row"
	if c.Index != 1 {
		rows = "rows"
	}
	a.Summary = fmt.Sprintf("A conclusion of model %s rests on %d %s.", c.Model, c.Index, rows)
	var b strings.Builder
	fmt.Fprintf(&b, "Removing %d %s", c.Index, rows)
	if len(c.Removed) > 0 {
		fmt.Fprintf(&b, " (%s)", strings.Join(c.Removed, ", "))
	}
	fmt.Fprintf(&b, " changes the conclusion %q", c.Conclusion)
	if c.Before != "" || c.After != "" {
		fmt.Fprintf(&b, " (with: %s; without: %s)", c.Before, c.After)
	}
	fmt.Fprintf(&b, ". The fragility index %d is at or below the limit %d. ", c.Index, rule.Limit)
	b.WriteString("When so few rows carry a conclusion, one mistaken measurement can reverse it. " +
		"Check those rows, and collect more data where they lie to make the conclusion sturdier.")
	a.Explanation = b.String()
}

func fillDrift(a *Alert, c DriftCondition, rule DriftRule) {
	a.Drift = &DriftDetail{Baseline: c.Baseline, Measures: c.Measures}
	a.Suggestion = c.Suggestion
	a.Measures = nil
	var parts []string
	for _, d := range c.Measures {
		if d.InBand {
			continue
		}
		a.Measures = append(a.Measures, Measure{Measure: "drift_" + d.Kind, Term: d.Name,
			Value: math.Abs(d.Difference), Cutoff: d.Band})
		what := "coefficient " + d.Name
		if d.Kind == DriftPrediction {
			what = "the prediction at checkpoint " + d.Name
		}
		s := fmt.Sprintf("%s is %s against %s at baseline", what, d.inUnit(d.Current), d.inUnit(d.Baseline))
		if d.Rule == "tolerance" {
			s += fmt.Sprintf(", a change of %s beyond the tolerance %s", d.inUnit(d.Difference), d.inUnit(d.Band))
		} else {
			s += fmt.Sprintf(", %s standard errors away (band %s)", fmtNum(math.Abs(d.Difference)/d.StdError), fmtNum(rule.K))
		}
		parts = append(parts, s)
	}
	a.Summary = fmt.Sprintf("Model %s has drifted from its baseline.", c.Model)
	a.Explanation = fmt.Sprintf("Compared with the baseline (%s), %s. ", c.Baseline, strings.Join(parts, "; ")) +
		shiftSentence(c.Measures) +
		"A calibration that moves after it was established can mean that the instrument, the standards or the " +
		"process have changed; results computed with the new fit are not comparable with those reported under the baseline."
}

func fillBlocked(a *Alert, c BlockedCondition) {
	a.Blocked = &BlockedDetail{Cause: c.Cause, Reason: c.Reason}
	a.Measures = []Measure{}
	a.Suggestion = nil
	if c.File != "" {
		a.Summary = fmt.Sprintf("File %s is not read for model %s.", c.File, c.Model)
		a.Explanation = fmt.Sprintf("plumb does not read file %s for model %s: %s. ", c.File, c.Model, c.Reason) +
			"The model goes on with its other files; this file's rows are not read until it is removed, replaced or fixed, " +
			"and this alert then resolves by itself."
		return
	}
	what := map[string]string{
		CauseTooFewRows:    "it has too few rows for its terms",
		CauseCollinear:     "some of its terms are collinear",
		CauseHeaderChanged: "the header of its data changed",
	}[c.Cause]
	if what == "" {
		what = "the fit failed"
	}
	a.Summary = fmt.Sprintf("Model %s cannot be fitted: %s.", c.Model, what)
	reason := ""
	if c.Reason != "" {
		reason = " (" + c.Reason + ")"
	}
	a.Explanation = fmt.Sprintf("plumb cannot fit model %s: %s%s. ", c.Model, what, reason) +
		"Until it can, new rows are stored but not judged, so suspect points, fragile conclusions and drift go unnoticed."
}

func fillSilence(a *Alert, c BlockedCondition, last time.Time, limit time.Duration) {
	lt := last.UTC()
	a.Blocked = &BlockedDetail{Cause: CauseSilent, Reason: c.Reason, LastData: &lt, Silence: limit.String()}
	a.Measures = []Measure{{Measure: "silence_seconds", Value: a.LastSeen.Sub(last).Seconds(), Cutoff: limit.Seconds()}}
	a.Suggestion = nil
	a.Summary = fmt.Sprintf("The feed of model %s has been silent longer than %s.", c.Model, limit)
	a.Explanation = fmt.Sprintf("No row has arrived for model %s since %s, longer than the configured %s. ",
		c.Model, lt.Format(time.RFC3339), limit) +
		"A silent feed can mean the instrument stopped, the export failed or files are written elsewhere; " +
		"no checks run without data."
}
