package daemon

import (
	"context"
	"fmt"
	"slices"
	"strings"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/analysis"
	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/view"
	"plumb/engine"
)

// CheckCalibration checks a model's [model.calibration] and units against
// its terms: every point gives a value for each predictor column and no
// other, readings to invert need a line or polynomial in one column, and
// units name columns of the model.
func CheckCalibration(spec engine.Model, mc config.Model) error {
	cols := spec.Columns()
	for k, at := range mc.Calibration.PredictAt {
		for _, c := range cols {
			if _, ok := at[c]; !ok {
				return fmt.Errorf("calibration.predict_at point %d: no value for %q (the predictor columns: %s)", k+1, c, strings.Join(cols, ", "))
			}
		}
		for c := range at {
			if !slices.Contains(cols, c) {
				return fmt.Errorf("calibration.predict_at point %d: %q is not a predictor column (the predictor columns: %s)", k+1, c, strings.Join(cols, ", "))
			}
		}
	}
	if len(mc.Calibration.Invert) > 0 {
		if len(cols) != 1 {
			return fmt.Errorf("calibration.invert: %w (this model uses %s)", engine.ErrNotPolynomial, strings.Join(cols, ", "))
		}
		for _, t := range spec.Terms {
			for _, f := range t.Factors {
				if f.Log {
					return fmt.Errorf("calibration.invert: %w (term %q takes a log)", engine.ErrNotPolynomial, t.Text)
				}
			}
		}
	}
	all := append([]string{spec.Response}, cols...)
	for c := range mc.Units {
		if !slices.Contains(all, c) {
			return fmt.Errorf("units: %q is not a column of the model (its columns: %s)", c, strings.Join(all, ", "))
		}
	}
	return nil
}

// answers is what the model's refresh is asked to answer.
func (m *watchedModel) answers() analysis.Answers {
	c := m.cfg.Calibration
	a := analysis.Answers{At: c.PredictAt, Readings: c.Invert,
		Interval: engine.IntervalOptions{Level: c.Level, Readings: c.ReadingsAveraged}}
	if len(c.Range) == 2 {
		a.Range = engine.Interval{Lo: c.Range[0], Hi: c.Range[1]}
	}
	return a
}

// recordAnswers adds the refresh's answers to the fit record's detail.
func recordAnswers(detail map[string]any, res *analysis.Result) {
	if len(res.Predictions) == 0 && len(res.Inverse) == 0 {
		return
	}
	vr := view.Result{Result: res}
	detail["predictions"] = vr.Predictions()
	detail["inverse"] = vr.Inverses()
}

// Answer answers predictions and inverse predictions from the model's
// current fit (view.Answerer). The calibrated range of an inverse is the
// configured calibration.range, else the range of the fitted rows.
func (v viewSource) Answer(ctx context.Context, name string, q view.Question) (view.Answers, error) {
	m, err := v.model(name)
	if err != nil {
		return view.Answers{}, err
	}
	m.mu.Lock()
	res, fitID := m.ref.res, m.ref.fitID
	m.mu.Unlock()
	if res == nil {
		return view.Answers{}, fmt.Errorf("model %q has no fit yet: %w", name, view.ErrState)
	}
	a := analysis.Answers{At: q.At, Readings: q.Readings,
		Interval: engine.IntervalOptions{Level: q.Level, Readings: q.Averaged}}
	if r := m.cfg.Calibration.Range; len(r) == 2 {
		a.Range = engine.Interval{Lo: r[0], Hi: r[1]}
	}
	// The fit is not changed after its refresh: no lock is needed to read it.
	preds, invs, err := analysis.Answer(res.Fit, a)
	if err != nil {
		return view.Answers{}, fmt.Errorf("%w: %v", view.ErrQuestion, err)
	}
	out := view.Answers{Model: name, FitID: fitID, Response: m.spec.Response, Units: m.cfg.Units, Caution: view.Caution}
	vr := view.Result{Result: &analysis.Result{Predictions: preds, Inverse: invs}}
	if len(q.At) > 0 {
		out.Predictions = vr.Predictions()
	}
	if len(q.Readings) > 0 {
		out.Inverse = vr.Inverses()
	}
	return out, nil
}

// shiftOf adds to a checkpoint's drift measure the shift of the curve
// there (engine.ShiftAt) and the units. nested says every row of the
// baseline fit is also a row of the current one; otherwise the shift's
// variance is taken as for disjoint rows, an upper bound when some rows
// are shared.
func (m *watchedModel) shiftOf(d *alerts.DriftMeasure, base, cur *engine.Fit, x []float64, nested bool) {
	ov := engine.Disjoint
	if nested {
		ov = engine.Nested
	}
	s := engine.ShiftAt(base, cur, x, ov)
	d.ShiftSE = s.SE
	d.Unit = m.cfg.Units[m.spec.Response]
	for c := range d.At {
		if u := m.cfg.Units[c]; u != "" {
			if d.AtUnits == nil {
				d.AtUnits = map[string]string{}
			}
			d.AtUnits[c] = u
		}
	}
}
