package analysis

import (
	"fmt"

	"plumb/engine"
)

// Answers asks for the numbers a calibration is kept for: the fitted
// value with its intervals at given points, and the inverse prediction of
// given readings (the value of the predictor a reading stands for).
type Answers struct {
	// At lists points, each a value for every predictor column.
	At []map[string]float64
	// Readings lists readings of the response to invert. Inverse
	// prediction needs a model that is a line or a polynomial in one
	// predictor column (engine.NewCalibration).
	Readings []float64
	// Interval sets the level and the number of readings averaged (the
	// zero value: 95 %, one reading).
	Interval engine.IntervalOptions
	// Range is the calibrated range the inverse searches; the zero
	// Interval means the range of the predictor in the fitted rows.
	Range engine.Interval
}

// Empty reports whether nothing is asked.
func (a Answers) Empty() bool { return len(a.At) == 0 && len(a.Readings) == 0 }

// Prediction is the answer at one point.
type Prediction struct {
	At map[string]float64
	engine.Prediction
}

// Steps of the answers.
const (
	StepPredict Step = "predict"
	StepInvert  Step = "invert"
)

// Answer computes the answers on a fit: the one place both the analysis
// step and the daemon's API compute them. The error is a *StepError
// naming the step (predict or invert) and wrapping the engine's
// (a *DataError for a point missing a column or naming another,
// engine.ErrNotPolynomial, engine.ErrBadOption).
func Answer(f *engine.Fit, q Answers) ([]Prediction, []engine.Inverse, error) {
	var preds []Prediction
	for k, at := range q.At {
		o := q.Interval
		if w := f.Model.Weight; w.Power > 0 && o.Weight == 0 {
			// A variance function of a column: a new reading there has
			// the weight the function gives at the point (a column of
			// weights says nothing of a reading not yet taken: weight 1).
			w0, err := w.RowWeight(func(c string) float64 { return at[c] })
			if err != nil {
				return nil, nil, &StepError{Step: StepPredict, Err: fmt.Errorf("point %d: %w", k+1, err)}
			}
			o.Weight = w0
		}
		p, err := f.PredictAt(at, o)
		if err != nil {
			return nil, nil, &StepError{Step: StepPredict, Err: fmt.Errorf("point %d: %w", k+1, err)}
		}
		preds = append(preds, Prediction{At: at, Prediction: p})
	}
	if len(q.Readings) == 0 {
		return preds, nil, nil
	}
	c, err := engine.NewCalibration(f, "", q.Range)
	if err != nil {
		return nil, nil, &StepError{Step: StepInvert, Err: err}
	}
	invs := make([]engine.Inverse, 0, len(q.Readings))
	for _, y := range q.Readings {
		inv, err := c.Invert(y, q.Interval)
		if err != nil {
			return nil, nil, &StepError{Step: StepInvert, Err: fmt.Errorf("reading %v: %w", y, err)}
		}
		invs = append(invs, inv)
	}
	return preds, invs, nil
}

// answer is the analysis step: the answers asked in Options.Answers.
func (a *Analysis) answer(r *Result) error {
	p, inv, err := Answer(r.Fit, a.Answers)
	if err != nil {
		return err
	}
	r.Predictions, r.Inverse = p, inv
	return nil
}
