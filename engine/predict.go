package engine

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"sync"
)

// DefaultLevel is the two-sided level of an interval when none is given.
const DefaultLevel = 0.95

var (
	// ErrBadOption: an interval option or a calibrated range is out of
	// its domain (level outside (0, 1), readings below 1, a weight that is
	// not positive, a range that is not finite and increasing).
	ErrBadOption = errors.New("engine: option out of range")
	// ErrNotPredictor: a value was given for a column the model does not
	// use as a predictor.
	ErrNotPredictor = errors.New("engine: not a predictor column of the model")
	// ErrNotPolynomial: inverse prediction needs a model in one predictor
	// column whose terms are all powers of that column (a line or a
	// polynomial, with or without an intercept).
	ErrNotPolynomial = errors.New("engine: inverse prediction needs a line or polynomial in one predictor column")
)

// Interval is a closed interval [Lo, Hi]. A bound that is not determined
// is NaN (see Inverse).
type Interval struct {
	Lo, Hi float64
}

// IntervalOptions sets the intervals of a prediction or an inverse
// prediction. The zero value asks for the defaults.
type IntervalOptions struct {
	// Level is the two-sided coverage in (0, 1); 0 means DefaultLevel.
	Level float64
	// Readings is the number m of new readings whose mean is predicted
	// (or, for an inverse prediction, whose mean is the reading); 0
	// means 1.
	Readings int
	// Weight is the weight w0 of each new reading on the scale of the
	// fit's weights: a new reading has variance σ²/w0. 0 means 1, which is
	// right for an unweighted fit.
	Weight float64
}

// resolved is IntervalOptions with the defaults filled in and checked.
type resolved struct {
	level float64
	m     int
	w0    float64
	t     float64 // t(1 - (1-level)/2; df)
}

func (o IntervalOptions) resolve(df int) (resolved, error) {
	r := resolved{level: o.Level, m: o.Readings, w0: o.Weight}
	if r.level == 0 {
		r.level = DefaultLevel
	}
	if r.m == 0 {
		r.m = 1
	}
	if r.w0 == 0 {
		r.w0 = 1
	}
	if !(r.level > 0 && r.level < 1) {
		return r, fmt.Errorf("%w: level %v is not between 0 and 1", ErrBadOption, o.Level)
	}
	if r.m < 1 {
		return r, fmt.Errorf("%w: %d readings (need at least 1)", ErrBadOption, o.Readings)
	}
	if !(r.w0 > 0) || math.IsInf(r.w0, 1) {
		return r, fmt.Errorf("%w: weight %v of a new reading is not a positive number", ErrBadOption, o.Weight)
	}
	r.t = tCrit(r.level, df)
	return r, nil
}

// tCache keeps the last few two-sided t quantiles: one TQuantile costs
// about 9 µs, more than a whole inverse prediction of a line, and a
// caller asks for the same level and df again and again.
var tCache struct {
	sync.Mutex
	next int
	e    [8]struct {
		level float64
		df    int
		t     float64
	}
}

// tCrit returns t(1-(1-level)/2; df).
func tCrit(level float64, df int) float64 {
	tCache.Lock()
	for _, e := range tCache.e {
		if e.level == level && e.df == df && e.t != 0 {
			tCache.Unlock()
			return e.t
		}
	}
	tCache.Unlock()
	t := TQuantile(1-(1-level)/2, float64(df))
	tCache.Lock()
	e := &tCache.e[tCache.next]
	e.level, e.df, e.t = level, df, t
	tCache.next = (tCache.next + 1) % len(tCache.e)
	tCache.Unlock()
	return t
}

// newVar returns 1/(m w0), the variance of the mean of the new readings
// in units of σ².
func (r resolved) newVar() float64 { return 1 / (float64(r.m) * r.w0) }

// Prediction is the fitted value at one point with its intervals. With
// h0 = x0'(X'X)^-1 x0 (Leverage), s = Sigma and t = t(1-(1-Level)/2; DF):
//
//	Fitted      ŷ0 = x0'b
//	SE          s·√h0                      standard error of the fitted mean
//	SEPredict   s·√(1/(m·w0) + h0)         of the mean of m new readings
//	Confidence  ŷ0 ± t·SE                  for the mean response at x0
//	Prediction  ŷ0 ± t·SEPredict           for the mean of m new readings
type Prediction struct {
	Fitted     float64
	SE         float64
	SEPredict  float64
	Leverage   float64
	Confidence Interval
	Prediction Interval
	Level      float64
	Readings   int
	Weight     float64
	DF         int
	T          float64
}

// PredictRow returns the prediction at design row x (length P, built
// like a row of X: with the leading 1 when the model has an intercept).
// It fails only with ErrBadOption; a row of the wrong length is a caller
// bug and panics.
func (f *Fit) PredictRow(x []float64, o IntervalOptions) (Prediction, error) {
	r, err := o.resolve(f.DF)
	if err != nil {
		return Prediction{}, err
	}
	return f.predictRow(x, r), nil
}

func (f *Fit) predictRow(x []float64, r resolved) Prediction {
	// ŷ0 = x'b accumulated in double-double, as Predict does (Predict
	// would also solve for the leverage, which is needed here anyway).
	var acc dd
	for j, v := range x {
		acc = acc.addProd(v, f.Coef[j].Estimate)
	}
	yhat := acc.float()
	h := f.Leverage(x)
	se := f.Sigma * math.Sqrt(h)
	sep := f.Sigma * math.Sqrt(r.newVar()+h)
	return Prediction{
		Fitted: yhat, SE: se, SEPredict: sep, Leverage: h,
		Confidence: Interval{yhat - r.t*se, yhat + r.t*se},
		Prediction: Interval{yhat - r.t*sep, yhat + r.t*sep},
		Level:      r.level, Readings: r.m, Weight: r.w0, DF: f.DF, T: r.t,
	}
}

// PredictAt returns the prediction at the point given by a value for
// each predictor column (at maps column name to value); the design row is
// built through the model, so powers, logs and products of columns work.
//
// Errors: a predictor column missing from at gives a *DataError (Row -1)
// wrapping ErrMissingColumn; a key of at that is no predictor of the
// model wraps ErrNotPredictor; a NaN or infinite value (or one a power
// makes infinite) wraps ErrNonFinite; log of a non-positive value wraps
// ErrLogDomain; bad options wrap ErrBadOption.
func (f *Fit) PredictAt(at map[string]float64, o IntervalOptions) (Prediction, error) {
	r, err := o.resolve(f.DF)
	if err != nil {
		return Prediction{}, err
	}
	if err := checkPoint(f.Model, at, ""); err != nil {
		return Prediction{}, err
	}
	x := make([]float64, f.P)
	if err := f.Model.DesignRow(x, func(c string) float64 { return at[c] }); err != nil {
		return Prediction{}, err
	}
	return f.predictRow(x, r), nil
}

// checkPoint checks that at holds a value for every predictor column of
// m except skip, and no other key.
func checkPoint(m Model, at map[string]float64, skip string) error {
	cols := m.Columns()
	uses := make(map[string]bool, len(cols))
	for _, c := range cols {
		uses[c] = true
		if c == skip {
			continue
		}
		if _, ok := at[c]; !ok {
			return &DataError{Row: -1, Column: c, Err: ErrMissingColumn}
		}
	}
	var extra []string
	for k := range at {
		if !uses[k] || k == skip {
			extra = append(extra, k)
		}
	}
	if len(extra) > 0 {
		sort.Strings(extra)
		return &DataError{Row: -1, Column: extra[0], Err: ErrNotPredictor}
	}
	return nil
}

// PredictGrid returns the predictions at the points where column takes
// each value of xs in turn and every other predictor column is held at
// its value in fixed (nil when the model has no other column): the
// points of a confidence or prediction band. Errors are those of
// PredictAt; a value of xs that cannot be used (log of a non-positive
// value, say) names column.
func (f *Fit) PredictGrid(column string, xs []float64, fixed map[string]float64, o IntervalOptions) ([]Prediction, error) {
	r, err := o.resolve(f.DF)
	if err != nil {
		return nil, err
	}
	found := false
	for _, c := range f.Model.Columns() {
		found = found || c == column
	}
	if !found {
		return nil, &DataError{Row: -1, Column: column, Err: ErrNotPredictor}
	}
	if err := checkPoint(f.Model, fixed, column); err != nil {
		return nil, err
	}
	out := make([]Prediction, len(xs))
	x := make([]float64, f.P)
	var cur float64
	value := func(c string) float64 {
		if c == column {
			return cur
		}
		return fixed[c]
	}
	for i, v := range xs {
		cur = v
		if err := f.Model.DesignRow(x, value); err != nil {
			return nil, err
		}
		out[i] = f.predictRow(x, r)
	}
	return out, nil
}
