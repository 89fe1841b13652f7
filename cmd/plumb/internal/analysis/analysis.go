// Package analysis runs one model on columns of data and returns one
// result: the fit, the influence table, the verdicts, the fragility and
// where to collect more data. `plumb inspect` and the daemon's refresh
// both call it; neither keeps its own sequence.
//
// The steps run in this order, each on what the earlier ones left in the
// Result:
//
//	design    the model's design matrix X and response y from the columns
//	refit     the least-squares fit (engine.Refit)
//	assess    influence measures and verdicts in one pass (engine.Assess)
//	fragility the fragility index, when asked (engine.Fragility)
//	suggest   where to measure next, when asked (engine.Suggest), in the
//	          range of the rows not judged suspect unless Options.Region
//	          says otherwise
//	answers   predictions at points and inverse predictions of
//	          readings, when asked (Answer: engine.PredictAt, Invert)
//
// To add a measure (intervals, model-form checks, weights): give Options
// its knob, Result its field, write a step method and list it in steps.
// The faces read it through one read model, view.Result (the dashboard,
// the report and inspect's writers), which gets the new field's reader.
//
// design and refit failures end the run with an error that wraps the
// engine's (engine.DataError, engine.ErrTooFewRows, ...): nothing can be
// judged without a fit. The later steps are optional: their failures are
// kept in Result.Problems and the run goes on, so the daemon can log them
// and a command can stop on them.
package analysis

import (
	"context"
	"fmt"

	"plumb/engine"
)

// Options says what to compute beyond the fit and the verdicts.
type Options struct {
	// Cutoffs are the judgement's cutoffs.
	Cutoffs engine.Cutoffs
	// Conclusions are what the fragility index and the suggestions
	// protect (engine.DefaultConclusions and the checkpoints).
	Conclusions engine.Conclusions

	// Fragility asks for the fragility index with FragilityOptions.
	Fragility        bool
	FragilityOptions engine.FragilityOptions

	// Suggest asks for suggestions. SuggestOptions' Conclusions,
	// Fragility and Label are filled from the fields above.
	Suggest        bool
	SuggestOptions engine.SuggestOptions
	// Region replaces, for the named predictor columns, the default
	// operating region the suggestions search: the range of the rows not
	// judged suspect.
	Region engine.Region

	// Answers asks for predictions and inverse predictions (none when
	// empty).
	Answers Answers

	// Label names the k-th fitted row (1-based) in words, e.g. "feed.csv:212".
	Label func(row int) string

	// Form asks for the checks of the model form (engine.CheckForm);
	// Pool for the poolability tests at PoolAlpha (0: engine's default)
	// when the model has one group and one numeric predictor (form.go).
	Form      bool
	Pool      bool
	PoolAlpha float64
}

// Analysis is one model with its options. Run may be called many times,
// by one goroutine at a time each.
type Analysis struct {
	Model engine.Model
	Options
}

// Result is everything one run computed. Fields of steps that were not
// asked for, or that failed, are nil.
type Result struct {
	Model engine.Model
	// Cols are the columns the run was given (not copied); Text the text
	// columns (group labels), nil when none.
	Cols map[string][]float64
	Text map[string][]string
	// Weights are the rows' weights (nil when the model is unweighted).
	// Model is the model as built: its group levels are those found.
	Weights []float64

	Fit       *engine.Fit
	Influence *engine.Influence
	Verdicts  []engine.Verdict
	// Limits are the numeric cutoffs for the fit's n and p.
	Limits engine.Limits

	Fragility *engine.FragilityResult
	// Region is the operating region the suggestions searched.
	Region      engine.Region
	Suggestions []engine.Suggestion
	// Suggested is true when the suggestions were computed (possibly
	// none).
	Suggested bool

	// Predictions and Inverse are the answers asked in Options.Answers,
	// in the order asked.
	Predictions []Prediction
	Inverse     []engine.Inverse
	// Form holds the checks of the model form, Pool the poolability
	// tests, when asked (Pool nil also when the model lacks the shape).
	Form *engine.FormChecks
	Pool *engine.Poolability

	// Problems are the failures of optional steps, in step order.
	Problems []*StepError
}

// Step names a step of the analysis.
type Step string

// The steps that can fail, in order (assess cannot).
const (
	StepDesign    Step = "design"
	StepRefit     Step = "refit"
	StepFragility Step = "fragility"
	StepRegion    Step = "region"
	StepSuggest   Step = "suggest"
	StepForm      Step = "form"
	StepPool      Step = "pool"
)

// StepError is the failure of one step; it wraps the engine's error.
type StepError struct {
	Step Step
	Err  error
}

func (e *StepError) Error() string { return fmt.Sprintf("%s: %v", e.Step, e.Err) }
func (e *StepError) Unwrap() error { return e.Err }

// Run analyses the columns: the response and every predictor column of
// the model, of equal length. The error, from design or refit, is a
// *StepError wrapping the engine's; ctx is checked between steps.
func (a *Analysis) Run(ctx context.Context, cols map[string][]float64) (*Result, error) {
	return a.RunData(ctx, engine.Data{Num: cols})
}

// RunData is Run on numeric and text columns (the labels of group
// terms; engine.Model.Build).
func (a *Analysis) RunData(ctx context.Context, d engine.Data) (*Result, error) {
	r := &Result{Model: a.Model, Cols: d.Num, Text: d.Text}
	for _, st := range a.steps() {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		err := st.run(r)
		if err == nil {
			continue
		}
		se, ok := err.(*StepError) // design and region name themselves
		if !ok {
			se = &StepError{Step: st.name, Err: err}
		}
		if !st.optional {
			return nil, se
		}
		r.Problems = append(r.Problems, se)
	}
	return r, nil
}

type step struct {
	name     Step
	optional bool
	run      func(*Result) error
}

// steps lists the steps in the order they run. A new measure is a new
// entry here.
func (a *Analysis) steps() []step {
	s := []step{
		{StepRefit, false, a.refit}, // design and refit: one step, see refit
		{"assess", false, a.assess},
	}
	if a.Form {
		s = append(s, step{StepForm, true, a.form})
	}
	if a.Pool {
		s = append(s, step{StepPool, true, a.pool})
	}
	if a.Fragility {
		s = append(s, step{StepFragility, true, a.fragility})
	}
	if a.Suggest {
		s = append(s, step{StepSuggest, true, a.suggest})
	}
	if !a.Answers.Empty() {
		s = append(s, step{StepPredict, true, a.answer}) // names its step
	}
	return s
}

// refit builds the design (engine.Model.Build: weights and group levels)
// and fits it. A design error is reported as StepDesign.
func (a *Analysis) refit(r *Result) error {
	ds, err := a.Model.Build(engine.Data{Num: r.Cols, Text: r.Text})
	if err != nil {
		return &StepError{Step: StepDesign, Err: err}
	}
	r.Model, r.Weights = ds.Model, ds.W
	r.Fit, err = ds.Fit()
	return err
}

func (a *Analysis) assess(r *Result) error {
	r.Influence, r.Verdicts = engine.Assess(r.Fit, a.Cutoffs)
	r.Limits = engine.CutoffLimits(a.Cutoffs, r.Fit.N, r.Fit.P)
	return nil
}

func (a *Analysis) fragility(r *Result) error {
	fr, err := engine.Fragility(r.Fit, r.Influence, a.Conclusions, a.FragilityOptions)
	if err != nil {
		return err
	}
	r.Fragility = &fr
	return nil
}

// suggest searches the operating region: the range of each predictor
// column over the rows not judged suspect (engine.RegionExcludingSuspect,
// so one wrong reading far outside does not pull the suggestions out to
// it), with the columns of Options.Region replaced. The engine gets the
// columns (to word a suggestion at a suspect reading's setting as a
// re-measurement) and the fragility already found (so it does not search
// the current fit again).
func (a *Analysis) suggest(r *Result) error {
	region, err := engine.RegionExcludingSuspect(a.Model, r.Cols, r.Verdicts)
	if err != nil {
		return &StepError{Step: StepRegion, Err: err}
	}
	for c, b := range a.Region {
		if _, ok := region[c]; ok {
			region[c] = b
		}
	}
	r.Region = region
	o := a.SuggestOptions
	o.Conclusions, o.Fragility, o.Label = a.Conclusions, a.FragilityOptions, a.Label
	o.Data, o.Before = r.Cols, r.Fragility
	sg, err := engine.Suggest(r.Fit, r.Influence, r.Verdicts, region, o)
	if err != nil {
		return err
	}
	r.Suggestions, r.Suggested = sg, true
	return nil
}
