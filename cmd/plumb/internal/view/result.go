package view

import (
	"math"

	"plumb/cmd/plumb/internal/analysis"
	"plumb/engine"
)

// Result is the read model of one analysis: what every face of plumb
// shows of it. The daemon builds the dashboard's and the report's
// ModelDetail from it (Coefficients, Points, Lines, Curves, Suggestions,
// FragilityOf); `plumb inspect` writes its table, CSV and JSON from it.
// A new measure of the analysis gets its reader here once.
type Result struct {
	*analysis.Result
	// Cutoffs are the judgement's cutoffs the result was judged with.
	Cutoffs engine.Cutoffs
	// Row gives where the i-th fitted row (0-based, fit order) came from:
	// for the daemon the observation's id, file and line; for a file
	// inspected once, the data row number as ID, the file and the line.
	Row func(i int) RowRef
}

// Coefficients lists the fit's coefficients with their 95 % intervals.
func (r *Result) Coefficients() []Coefficient {
	out := make([]Coefficient, len(r.Fit.Coef))
	for i, c := range r.Fit.Coef {
		out[i] = Coefficient{Term: c.Term, Estimate: Float(c.Estimate), StdError: Float(c.StdError),
			T: Float(c.T), P: Float(c.P), Lower95: Float(c.Lower95), Upper95: Float(c.Upper95)}
	}
	return out
}

// Point is the i-th fitted row with its measures, verdict and flags.
func (r *Result) Point(i int) Point {
	o := r.Influence.Rows[i]
	v := r.Verdicts[i]
	ref := r.Row(i)
	p := Point{ID: ref.ID, Row: i, File: ref.File, Line: ref.Line, Label: ref.Label,
		X: make(map[string]Float, len(r.Model.Columns())), Y: Float(r.Cols[r.Model.Response][i]), Fitted: Float(r.Fit.Fitted[i]),
		Residual: Float(o.Residual), Leverage: Float(o.Leverage),
		StudentizedExternal: Float(o.StudentExternal), Cook: Float(o.Cook),
		DFFITS: Float(o.DFFITS), BonferroniP: Float(o.BonferroniP), Verdict: string(v.Word())}
	for _, c := range r.Model.Columns() {
		if v, ok := r.Cols[c]; ok {
			p.X[c] = Float(v[i])
		} else if t, ok := r.Text[c]; ok {
			if p.Labels == nil {
				p.Labels = map[string]string{}
			}
			p.Labels[c] = t[i]
		}
	}
	for _, fl := range v.Flags {
		p.Flags = append(p.Flags, Flag(fl))
	}
	return p
}

// Points lists every fitted row in fit order.
func (r *Result) Points() []Point {
	out := make([]Point, r.Fit.N)
	for i := range out {
		out[i] = r.Point(i)
	}
	return out
}

// Lines are the cutoff lines the diagnostic charts draw.
func (r *Result) Lines() Cutoffs {
	n, p := float64(r.Fit.N), float64(r.Fit.P)
	// The Bonferroni critical |t|: the t(n-p-1) quantile at 1 - alpha/(2n).
	tcrit := engine.TQuantile(1-r.Cutoffs.Alpha/(2*n), n-p-1)
	return Cutoffs{Leverage: Float(r.Limits.Leverage), CookAbsolute: Float(r.Limits.CookAbsolute),
		CookSizeAdjusted: Float(r.Limits.CookSize), TCritical: Float(tcrit), Alpha: Float(r.Cutoffs.Alpha)}
}

// MaxCook is the largest Cook's distance (0 when none is defined).
func (r *Result) MaxCook() Float {
	mc := 0.0
	for _, o := range r.Influence.Rows {
		if o.Cook > mc {
			mc = o.Cook
		}
	}
	return Float(mc)
}

// Count is how many rows have the verdict word w.
func (r *Result) Count(w engine.Word) int {
	n := 0
	for _, v := range r.Verdicts {
		if v.Word() == w {
			n++
		}
	}
	return n
}

// FragilityOf describes the fragility result; limit is the configured
// fragile-fit limit (0 when none).
func (r *Result) FragilityOf(k, limit int) Fragility {
	fr := r.Fragility
	if fr == nil {
		return Fragility{}
	}
	f := Fragility{Computed: true, K: k, Limit: limit, Fragile: fr.Fragile, Searched: fr.Searched}
	if fr.Index > 0 {
		f.Found, f.Index, f.Conclusion = true, fr.Index, fr.Conclusion
		for _, row := range fr.RemovedRows {
			if row >= 1 && row <= r.Fit.N {
				f.Rows = append(f.Rows, r.Row(row-1))
			}
		}
	}
	return f
}

// SuggestionViews lists the suggestions.
func (r *Result) SuggestionViews() []Suggestion {
	var out []Suggestion
	for _, s := range r.Suggestions {
		at := make(map[string]Float, len(s.At))
		for k, x := range s.At {
			at[k] = Float(x)
		}
		out = append(out, Suggestion{At: at, Text: s.Text, DGain: Float(s.DGain), Replicates: s.Replicates})
	}
	return out
}

// Curves evaluates the fitted mean, its 95 % confidence band and the 95 %
// prediction band of one new reading over each numeric predictor column
// at steps+1 points across its observed range, the other predictors held
// at their means and each group at its reference level (the first in
// byte order).
func (r *Result) Curves(steps int) []Curve {
	var cols []string
	for _, c := range r.Model.Columns() {
		if _, ok := r.Cols[c]; ok && !r.groupOnly(c) {
			cols = append(cols, c)
		}
	}
	means := map[string]float64{}
	lo, hi := map[string]float64{}, map[string]float64{}
	for _, c := range cols {
		s, a, b := 0.0, math.Inf(1), math.Inf(-1)
		for _, x := range r.Cols[c] {
			s += x
			a, b = min(a, x), max(b, x)
		}
		means[c] = s / float64(len(r.Cols[c]))
		lo[c], hi[c] = a, b
	}
	tq := engine.TQuantile(0.975, float64(r.Fit.DF))
	x := make([]float64, r.Model.P())
	var out []Curve
	for _, c := range cols {
		cv := Curve{Predictor: c}
		if len(cols) > 1 {
			cv.Held = map[string]Float{}
			for _, o := range cols {
				if o != c {
					cv.Held[o] = Float(means[o])
				}
			}
		}
		for k := 0; k <= steps; k++ {
			xv := lo[c] + (hi[c]-lo[c])*float64(k)/float64(steps)
			err := r.Model.DesignRowData(x, func(col string) float64 {
				if col == c {
					return xv
				}
				return means[col]
			}, r.reference)
			if err != nil {
				continue
			}
			y, se := r.Fit.Predict(x)
			cv.X = append(cv.X, Float(xv))
			cv.Y = append(cv.Y, Float(y))
			cv.Lower = append(cv.Lower, Float(y-tq*se))
			cv.Upper = append(cv.Upper, Float(y+tq*se))
			// One new reading: s·√(1 + h), with se² = s²h.
			sp := math.Sqrt(r.Fit.Sigma*r.Fit.Sigma + se*se)
			cv.PredLower = append(cv.PredLower, Float(y-tq*sp))
			cv.PredUpper = append(cv.PredUpper, Float(y+tq*sp))
		}
		out = append(out, cv)
	}
	return out
}

// groupOnly reports whether column c enters the model only through
// group(...) factors.
func (r *Result) groupOnly(c string) bool {
	for _, t := range r.Model.Terms {
		for _, f := range t.Factors {
			if f.Column == c && !f.Group {
				return false
			}
		}
	}
	return true
}

// reference is a group column's reference level, the label curves hold
// it at.
func (r *Result) reference(col string) string {
	if lv := r.Model.Levels[col]; len(lv) > 0 {
		return lv[0]
	}
	return ""
}
