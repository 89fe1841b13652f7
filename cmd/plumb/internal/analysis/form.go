package analysis

import (
	"errors"

	"plumb/engine"
)

// form computes the checks of the model form on the fit and its
// influence table (the leverages); each is the weighted version for a
// weighted fit (engine.CheckForm).
func (a *Analysis) form(r *Result) error {
	fc := engine.CheckForm(r.Fit, r.Influence)
	r.Form = &fc
	return nil
}

// pool runs the poolability tests when the model has one group column and
// one numeric predictor; another shape leaves Result.Pool nil without a
// problem (the tests do not apply).
func (a *Analysis) pool(r *Result) error {
	if len(r.Model.GroupColumns()) == 0 {
		return nil
	}
	p, err := engine.Pool(r.Model, engine.Data{Num: r.Cols, Text: r.Text}, a.PoolAlpha)
	if errors.Is(err, engine.ErrPoolShape) {
		return nil
	}
	if err != nil {
		return err
	}
	r.Pool = &p
	return nil
}
