package main

// plumb inspect: weights, group terms, the checks of the model form and
// the poolability of groups (flags, data columns, JSON and table).

import (
	"bufio"
	"errors"
	"flag"
	"fmt"
	"strconv"

	"plumb/cmd/plumb/internal/view"
	"plumb/engine"
	"plumb/watcher/decode"
)

const inspectFormDescription = `--weights fits by weighted least squares: a column of weights (--weights w)
or a variance function of one column, inverse(x) for w = 1/x and
inverse(x^2) for w = 1/x^2 (powers 1-20). A row whose weight is zero,
negative or not a finite number is left out with file:line:column.

group(batch) in --terms turns a column of labels (text or numbers) into
one coefficient per level but the first in byte order (named batch=B);
group(batch)*months gives each level its own months slope (batch=B*months).
A text column used as a plain term is refused with that suggestion.
With one group and one numeric predictor, the poolability tests (equal
slopes, then equal intercepts) run at --pool-alpha (default 0.25).

Every fit is checked for its form: lack of fit against the spread of
repeated settings, Durbin-Watson on the residuals in file order,
Breusch-Pagan for a spread that changes, and PRESS with the predicted
R-squared (weighted versions for a weighted fit).`

// formFlags registers the flags of this file; the returned function
// checks them once parsed.
func formFlags(fs *flag.FlagSet, opt *inspectOptions) func() error {
	fs.StringVar(&opt.weights, "weights", "", "weighted fit: a `column` of weights, or inverse(x) / inverse(x^2) for w = 1/x, 1/x^2")
	fs.Float64Var(&opt.poolAlpha, "pool-alpha", engine.DefaultPoolAlpha, "significance `level` of the poolability tests (one group and one numeric predictor)")
	fs.Float64Var(&opt.formLevel, "form-level", 0.05, "significance `level` at which the table and csv words call a check of the model form significant")
	return func() error {
		w, err := engine.ParseWeighting(opt.weights)
		if err != nil {
			var te *engine.TermError
			if errors.As(err, &te) {
				return fmt.Errorf("inspect: %w: --weights %q: %s (character %d)", errUsage, opt.weights, te.Msg, te.Pos+1)
			}
			return fmt.Errorf("inspect: %w: --weights %q: %v", errUsage, opt.weights, err)
		}
		opt.weighting = w
		if !(opt.formLevel > 0 && opt.formLevel < 1) {
			return fmt.Errorf("inspect: %w: --form-level %v: want a level strictly between 0 and 1", errUsage, opt.formLevel)
		}
		if !(opt.poolAlpha > 0 && opt.poolAlpha < 1) {
			return fmt.Errorf("inspect: %w: --pool-alpha %v: want a level strictly between 0 and 1", errUsage, opt.poolAlpha)
		}
		return nil
	}
}

// dataColumns splits the columns a model reads into those parsed as
// numbers (the response first, then the predictors used as numbers, then
// a weight column not among them) and those kept as text (columns used
// only in group(...)).
func dataColumns(m engine.Model) (num, text []string) {
	num = []string{m.Response}
	for _, c := range m.Columns() {
		if groupOnly(m, c) {
			text = append(text, c)
		} else if c != m.Response {
			num = append(num, c)
		}
	}
	if w := m.Weight.Column; w != "" && !containsString(num, w) && !containsString(text, w) {
		num = append(num, w)
	}
	return num, text
}

// groupOnly reports whether column c enters m only through group(...).
func groupOnly(m engine.Model, c string) bool {
	used := false
	for _, t := range m.Terms {
		for _, f := range t.Factors {
			if f.Column == c {
				if !f.Group {
					return false
				}
				used = true
			}
		}
	}
	return used
}

func containsString(s []string, x string) bool {
	for _, v := range s {
		if v == x {
			return true
		}
	}
	return false
}

// textColumnHint returns an error suggesting group(...) when every data
// row was refused because one column the model uses as a number holds
// text; nil otherwise.
func textColumnHint(ds *inspectData, m engine.Model) error {
	if ds.total == 0 || len(ds.rowNo) > 0 {
		return nil
	}
	count := map[string]int{}
	for _, r := range ds.rejected {
		if errors.Is(r.err, decode.ErrNotNumber) {
			count[r.Field]++
		}
	}
	for _, c := range m.Columns() {
		if count[c] == ds.total {
			return &exitError{code: 1, err: fmt.Errorf("inspect: %s: column %q holds text, not numbers, in every row; to use its values as levels write group(%s) in --terms",
				ds.file, c, termName(c))}
		}
	}
	return nil
}

// termName writes a column name as --terms reads it.
func termName(c string) string {
	w := engine.Weighting{Column: c}
	return w.String()
}

// jsonForm is the part of inspect's JSON this file adds.
type jsonForm struct {
	Weights *string `json:"weights"`
	view.FormChecks
	Poolability *view.Poolability `json:"poolability"`
}

func (r *inspectResult) jsonForm() jsonForm {
	var j jsonForm
	if w := r.Weights(); w != "" {
		j.Weights = &w
	}
	if fc := r.FormChecks(); fc != nil {
		j.FormChecks = *fc
	}
	j.Poolability = r.Poolability()
	return j
}

// writeFormTable writes the weighting, the checks of the model form and
// the poolability in words.
func (r *inspectResult) writeFormTable(bw *bufio.Writer) {
	fc := r.FormChecks()
	if fc == nil {
		return
	}
	bw.WriteString("== Does the form of the model hold? ==\n")
	if w := r.Weights(); w != "" {
		fmt.Fprintf(bw, "  weighted fit, weights %s; each check below is its weighted version\n", w)
	}
	if fc.LackOfFit == nil {
		bw.WriteString("  lack of fit: not tested (no repeated settings, or no more settings than coefficients)\n")
	}
	for _, f := range fc.Findings(r.formLevel) {
		switch f.Check {
		case view.FormLackOfFit:
			l := fc.LackOfFit
			fmt.Fprintf(bw, "  lack of fit: F %s on %d and %d degrees of freedom (%d settings), p %s\n",
				num4(float64(l.F)), l.LackOfFitDF, l.PureErrorDF, l.Groups, pval(float64(l.P)))
		case view.FormDurbinWatson:
			d := fc.DurbinWatson
			p := dwPval(float64(d.P), d.Method)
			fmt.Fprintf(bw, "  Durbin-Watson (rows in file order): %s, p %s (%s)\n", num4(float64(d.Statistic)), p, d.Method)
		case view.FormBreuschPagan:
			b := fc.BreuschPagan
			fmt.Fprintf(bw, "  Breusch-Pagan (studentized): %s on %d degrees of freedom, p %s\n", num4(float64(b.Statistic)), b.DF, pval(float64(b.P)))
		}
		fmt.Fprintf(bw, "    %s\n", f.Words)
		if f.Significant {
			fmt.Fprintf(bw, "    a usual next step: %s\n", f.Next)
		}
	}
	if fc.DurbinWatson == nil {
		bw.WriteString("  Durbin-Watson: not computed\n")
	}
	if fc.BreuschPagan == nil {
		bw.WriteString("  Breusch-Pagan: not computed (one coefficient, or residuals all of one size)\n")
	}
	fmt.Fprintf(bw, "  PRESS %s, predicted R-squared %s (leave-one-out prediction)\n", num4(float64(fc.PRESS)), fixed5(float64(fc.PredictedRSquared)))
	fmt.Fprintf(bw, "  (judged at the %s level, --form-level; a significant check is a reason to look, not a verdict)\n", strconv.FormatFloat(r.formLevel, 'g', -1, 64))
	if p := r.Poolability(); p != nil {
		bw.WriteString("\n== Can the groups be pooled? ==\n")
		fmt.Fprintf(bw, "  %d levels of %s, slope on %s, tested at %s\n", p.Levels, p.Group, p.Predictor, strconv.FormatFloat(float64(p.Alpha), 'g', -1, 64))
		fmt.Fprintf(bw, "  equal slopes: F %s on %d and %d degrees of freedom, p %s\n", num4(float64(p.Slopes.F)), p.Slopes.DF1, p.Slopes.DF2, pval(float64(p.Slopes.P)))
		fmt.Fprintf(bw, "  equal intercepts: F %s on %d and %d degrees of freedom, p %s\n", num4(float64(p.Intercepts.F)), p.Intercepts.DF1, p.Intercepts.DF2, pval(float64(p.Intercepts.P)))
		fmt.Fprintf(bw, "  verdict: %s (%s)\n", p.Verdict, p.Words())
	} else if r.poolProblem != "" {
		fmt.Fprintf(bw, "\n== Can the groups be pooled? ==\n  not tested: %s\n", r.poolProblem)
	}
	bw.WriteByte('\n')
}

// formLines are the checks of the model form in words, one line each,
// for the csv format's standard error.
func (r *inspectResult) formLines() []string {
	fc := r.FormChecks()
	if fc == nil {
		return nil
	}
	var out []string
	if w := r.Weights(); w != "" {
		out = append(out, "weighted fit, weights "+w+"; each check is its weighted version")
	}
	for _, l := range fc.Lines(r.formLevel) {
		s := l.Name + ": " + l.Words
		if l.Tested {
			s = fmt.Sprintf("%s: statistic %s", l.Name, num4(float64(l.Statistic)))
			if l.DF != "" {
				s += " on " + l.DF + " df"
			}
			s += ", p " + dwPval(float64(l.P), l.Method) + ": " + l.Words
		}
		if l.Next != "" {
			s += "; a usual next step: " + l.Next
		}
		out = append(out, s)
	}
	out = append(out, fmt.Sprintf("PRESS %s, predicted R-squared %s", num4(float64(fc.PRESS)), fixed5(float64(fc.PredictedRSquared))))
	if p := r.Poolability(); p != nil {
		out = append(out, fmt.Sprintf("poolability of %s (%d levels) at %s: slopes p %s, intercepts p %s: %s (%s)",
			p.Group, p.Levels, strconv.FormatFloat(float64(p.Alpha), 'g', -1, 64), pval(float64(p.Slopes.P)), pval(float64(p.Intercepts.P)), p.Verdict, p.Words()))
	}
	return out
}

// dwPval writes a check's p; an exact Durbin-Watson p below 1e-8, the
// exact route's accuracy (engine.DurbinWatson), as "< 1e-8".
func dwPval(p float64, method string) string {
	if method == engine.DWExact && p < 1e-8 {
		return "< 1e-8"
	}
	return pval(p)
}

func fixed5(x float64) string {
	if x != x {
		return "undefined"
	}
	return strconv.FormatFloat(x, 'f', 5, 64)
}

// rejectBadWeights sets aside, before the design is built, the rows whose
// weight is zero, negative or not finite (for inverse(x^k), 1/x^k), each
// with the weight column's place, so that one such row does not stop the
// fit.
func (ds *inspectData) rejectBadWeights(m engine.Model, delim byte) {
	w := m.Weight
	if !w.Weighted() {
		return
	}
	v, ok := ds.cols[w.Column]
	if !ok {
		return
	}
	var drop []int
	for i, x := range v {
		wi, err := w.RowWeight(func(string) float64 { return x })
		if err == nil && wi > 0 {
			continue
		}
		what := "weight " + strconv.FormatFloat(x, 'g', -1, 64)
		if w.Power > 0 {
			what = fmt.Sprintf("weight %s from %s = %s", strconv.FormatFloat(wi, 'g', -1, 64), w, strconv.FormatFloat(x, 'g', -1, 64))
			if err != nil {
				what = fmt.Sprintf("weight %s at %s = %s", w, w.Column, strconv.FormatFloat(x, 'g', -1, 64))
			}
		}
		ds.reject(i, w.Column, what+": a weight must be a positive finite number", delim)
		drop = append(drop, i)
	}
	ds.drop(drop)
}
