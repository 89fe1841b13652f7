package view

import (
	"math"
	"strconv"

	"plumb/engine"
)

// Checks of the model form, the poolability of groups and the weighting,
// as every face shows them. The JSON names are those of `plumb inspect`:
// a check that cannot be made is null.

// FormChecks are the checks of the model form of one fit
// (engine.CheckForm). For a weighted fit each is the weighted version.
type FormChecks struct {
	LackOfFit         *LackOfFit    `json:"lack_of_fit"`
	DurbinWatson      *DurbinWatson `json:"durbin_watson"`
	BreuschPagan      *BreuschPagan `json:"breusch_pagan"`
	PRESS             Float         `json:"press"`
	PredictedRSquared Float         `json:"predicted_r_squared"`
}

// LackOfFit is the lack-of-fit test against pure error.
type LackOfFit struct {
	Groups      int   `json:"groups"`
	PureErrorDF int   `json:"pure_error_df"`
	LackOfFitDF int   `json:"lack_of_fit_df"`
	F           Float `json:"f"`
	P           Float `json:"p"`
}

// DurbinWatson is the Durbin-Watson test on the residuals in arrival
// order; P is for positive autocorrelation, Method how it was computed.
type DurbinWatson struct {
	Statistic Float  `json:"statistic"`
	P         Float  `json:"p"`
	Method    string `json:"method"`
}

// BreuschPagan is the studentized (Koenker) Breusch-Pagan test.
type BreuschPagan struct {
	Statistic Float `json:"statistic"`
	DF        int   `json:"df"`
	P         Float `json:"p"`
}

// FormOf converts the engine's checks.
func FormOf(fc *engine.FormChecks) *FormChecks {
	if fc == nil {
		return nil
	}
	out := &FormChecks{PRESS: Float(fc.PRESS), PredictedRSquared: Float(fc.PredictedRSquared)}
	if l := fc.LackOfFit; l != nil {
		out.LackOfFit = &LackOfFit{Groups: l.Groups, PureErrorDF: l.PureErrorDF, LackOfFitDF: l.LackOfFitDF, F: Float(l.F), P: Float(l.P)}
	}
	if d := fc.DurbinWatson; d != nil {
		out.DurbinWatson = &DurbinWatson{Statistic: Float(d.Statistic), P: Float(d.P), Method: d.Method}
	}
	if b := fc.BreuschPagan; b != nil {
		out.BreuschPagan = &BreuschPagan{Statistic: Float(b.Statistic), DF: b.DF, P: Float(b.P)}
	}
	return out
}

// FormChecks is the result's checks of the model form (nil when not computed).
func (r *Result) FormChecks() *FormChecks { return FormOf(r.Result.Form) }

// FormFinding is one check of the model form in plain words.
type FormFinding struct {
	Check     string // FormLackOfFit, ...
	Statistic float64
	P         float64
	// Significant is P < the level given to Findings.
	Significant bool
	// Words says what the check found, Next what a person usually does
	// about it (a suggestion; decisions stay with qualified staff).
	Words, Next string
}

// The checks by name, as alerts and the faces name them.
const (
	FormLackOfFit    = "lack_of_fit"
	FormDurbinWatson = "durbin_watson"
	FormBreuschPagan = "breusch_pagan"
)

// Findings lists the checks that could be made, in a fixed order, with
// whether each is significant at level alpha.
func (fc *FormChecks) Findings(alpha float64) []FormFinding {
	if fc == nil {
		return nil
	}
	var out []FormFinding
	add := func(check string, stat, p float64, yes, no, next string) {
		f := FormFinding{Check: check, Statistic: stat, P: p, Significant: !math.IsNaN(p) && p < alpha, Next: next}
		f.Words = no
		if f.Significant {
			f.Words = yes
		}
		out = append(out, f)
	}
	if l := fc.LackOfFit; l != nil {
		add(FormLackOfFit, float64(l.F), float64(l.P),
			"the mean of y at repeated settings departs from the fitted curve more than the repeats scatter: the terms may miss a curve or an interaction",
			"the fitted curve passes within the scatter of the repeated settings",
			"consider adding a term (a power, a product or a group) and compare the fits")
	}
	if d := fc.DurbinWatson; d != nil {
		add(FormDurbinWatson, float64(d.Statistic), float64(d.P),
			"neighbouring residuals in arrival order move together: the errors do not look independent",
			"no sign that neighbouring residuals in arrival order move together",
			"look at the residuals in arrival order for runs, steps or a drift (a change of instrument, batch or day)")
	}
	if b := fc.BreuschPagan; b != nil {
		add(FormBreuschPagan, float64(b.Statistic), float64(b.P),
			"the spread of the residuals changes with the terms: the variance does not look constant",
			"no sign that the spread of the residuals changes with the terms",
			"consider weighting the fit (weights = \"inverse(x)\" or \"inverse(x^2)\", or measured variances)")
	}
	return out
}

// CheckName is a check's name in words.
func CheckName(check string) string {
	switch check {
	case FormLackOfFit:
		return "lack of fit"
	case FormDurbinWatson:
		return "Durbin-Watson"
	case FormBreuschPagan:
		return "Breusch-Pagan"
	}
	return check
}

// Poolability is the poolability verdict of a model with one group and
// one numeric predictor (engine.Pool).
type Poolability struct {
	Group      string   `json:"group"`
	Predictor  string   `json:"predictor"`
	Levels     int      `json:"levels"`
	Alpha      Float    `json:"alpha"`
	Slopes     PoolTest `json:"slopes"`
	Intercepts PoolTest `json:"intercepts"`
	Verdict    string   `json:"verdict"`
}

// PoolTest is one F test of the poolability sequence.
type PoolTest struct {
	F   Float `json:"f"`
	DF1 int   `json:"df1"`
	DF2 int   `json:"df2"`
	P   Float `json:"p"`
}

// PoolOf converts the engine's poolability.
func PoolOf(p *engine.Poolability) *Poolability {
	if p == nil {
		return nil
	}
	t := func(x engine.PoolTest) PoolTest {
		return PoolTest{F: Float(x.F), DF1: x.DF1, DF2: x.DF2, P: Float(x.P)}
	}
	return &Poolability{Group: p.Group, Predictor: p.Predictor, Levels: p.Levels, Alpha: Float(p.Alpha),
		Slopes: t(p.Slopes), Intercepts: t(p.Intercepts), Verdict: p.Verdict}
}

// Poolability is the result's poolability (nil when not computed or not
// applicable).
func (r *Result) Poolability() *Poolability { return PoolOf(r.Result.Pool) }

// Weights is the model's weighting in plumb's notation ("" unweighted).
func (r *Result) Weights() string { return r.Model.Weight.String() }

// FormLine is one check of the model form as a page shows it: every
// check, made or not.
type FormLine struct {
	Name      string // the check in words
	Tested    bool
	Statistic Float
	DF        string // "10, 70" for an F, "3" for a chi-square, "" for none
	P         Float
	Method    string // how P was computed, when it says something
	// Significant is P below the level Lines was given.
	Significant bool
	// Words says what the check found (or why it was not made); Next, for
	// a significant check, what a person usually does next.
	Words, Next string
}

// Lines lists the three checks in a fixed order, judged at level alpha.
func (fc *FormChecks) Lines(alpha float64) []FormLine {
	if fc == nil {
		return nil
	}
	found := map[string]FormFinding{}
	for _, f := range fc.Findings(alpha) {
		found[f.Check] = f
	}
	var out []FormLine
	for _, check := range []string{FormLackOfFit, FormDurbinWatson, FormBreuschPagan} {
		l := FormLine{Name: CheckName(check)}
		f, ok := found[check]
		if !ok {
			switch check {
			case FormLackOfFit:
				l.Words = "not tested: no repeated settings, or no more settings than coefficients"
			case FormBreuschPagan:
				l.Words = "not tested: one coefficient, or residuals all of one size"
			default:
				l.Words = "not computed"
			}
			out = append(out, l)
			continue
		}
		l.Tested, l.Statistic, l.P, l.Significant, l.Words = true, Float(f.Statistic), Float(f.P), f.Significant, f.Words
		if f.Significant {
			l.Next = f.Next
		}
		switch check {
		case FormLackOfFit:
			l.DF = strconv.Itoa(fc.LackOfFit.LackOfFitDF) + ", " + strconv.Itoa(fc.LackOfFit.PureErrorDF)
		case FormDurbinWatson:
			l.Method = fc.DurbinWatson.Method
		case FormBreuschPagan:
			l.DF = strconv.Itoa(fc.BreuschPagan.DF)
		}
		out = append(out, l)
	}
	return out
}

// Words explains a poolability verdict in words.
func (p *Poolability) Words() string {
	switch p.Verdict {
	case engine.PoolAll:
		return "neither the slopes nor the intercepts differ significantly: one line may serve every level"
	case engine.PoolSlopes:
		return "the slopes do not differ significantly but the intercepts do: one slope, a line per level"
	case engine.PoolNone:
		return "the slopes differ: each level keeps its own line"
	}
	return p.Verdict
}
