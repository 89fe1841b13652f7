package alerts

// PointCondition reports one newly arrived observation as the engine judged
// it against the fit that includes it. Report every judged row, suspect or
// not: a row that stops being suspect resolves its alert.
type PointCondition struct {
	Model string
	// File is relative to the model's folder, with '/'; Line is 1-based.
	File string
	Line int
	// Label is the row's own name, the text of the model's id column (a
	// serial number, a sample id); "" when the model has none.
	Label string
	// Values are the row's values by column name (response and predictors).
	Values Values
	// Outlier and Influential are the engine's verdict. When Measures holds
	// a measure of the same category the Manager decides from the measures
	// and the rule instead (see PointRule).
	Outlier     bool
	Influential bool
	// Measures are the cutoffs the row crossed (the engine's flags).
	Measures   []Measure
	Suggestion *Suggestion
}

// FragilityCondition reports a fit's fragility index: the smallest number of
// rows whose removal changes a conclusion of the fit. Index <= 0 means no
// removal of up to the searched number of rows changes it (not fragile).
// Report it only when the index was computed.
type FragilityCondition struct {
	Model string
	Index int
	// Removed names the rows whose removal changes the conclusion, as
	// "file:line" relative to the model's folder.
	Removed []string
	// Conclusion is the conclusion at stake, e.g. "slope of dose differs from 0
	// at the 5% level"; Before and After describe it with and without the rows.
	Conclusion string
	Before     string
	After      string
	Suggestion *Suggestion
}

// DriftKind tells what a DriftMeasure compares.
const (
	DriftCoefficient = "coefficient"
	DriftPrediction  = "prediction"
)

// DriftMeasure compares one quantity of the current fit with the baseline.
// The daemon fills Name, Kind, At, Baseline, Current and StdError; the
// Manager fills Difference, Band, Rule and InBand.
type DriftMeasure struct {
	// Name is the coefficient's term, or a checkpoint's label.
	Name string `json:"name"`
	// Kind is DriftCoefficient or DriftPrediction.
	Kind string `json:"kind"`
	// At is the checkpoint in predictor units (predictions only).
	At       Values  `json:"at,omitempty"`
	Baseline float64 `json:"-"`
	Current  float64 `json:"-"`
	// StdError is the baseline's standard error of the quantity; the band
	// is K standard errors wide unless a tolerance in units is configured.
	StdError float64 `json:"-"`

	Difference float64 `json:"-"`
	Band       float64 `json:"-"`
	// Rule is "k_se" or "tolerance": which band applied.
	Rule   string `json:"rule"`
	InBand bool   `json:"in_band"`

	// For a prediction, the daemon may add the standard error of the
	// shift Current - Baseline (engine.ShiftAt; 0 when not known), the
	// response's unit and the units of the checkpoint's columns: the
	// alert then says how far the curve moved there in units
	// (drift_shift.go).
	ShiftSE float64           `json:"-"`
	Unit    string            `json:"unit,omitempty"`
	AtUnits map[string]string `json:"at_units,omitempty"`
}

// DriftCondition reports a refit compared with the model's baseline.
type DriftCondition struct {
	Model string
	// Baseline says which fit is the baseline, e.g. "fit after the first 20
	// rows" or "pinned fit of 2026-11-30".
	Baseline   string
	Measures   []DriftMeasure
	Suggestion *Suggestion
}

// Causes of a blocked model.
const (
	CauseTooFewRows    = "too_few_rows"
	CauseCollinear     = "collinear"
	CauseHeaderChanged = "header_changed"
	CauseNotFittable   = "not_fittable"
	CauseSilent        = "silent"
	// CauseFileRefused: one file in the model's folder cannot be read for
	// the model (another header, an unreadable encoding, not a regular
	// file); the model goes on with its other files.
	CauseFileRefused = "file_refused"
)

// BlockedCondition reports whether a model can be fitted. Blocked false
// resolves an open blocked alert for the model.
type BlockedCondition struct {
	Model   string
	Blocked bool
	// Cause is one of the Cause constants ("" counts as CauseNotFittable);
	// Reason is the plain-language reason, e.g. the engine's error text.
	Cause  string
	Reason string
	// File, when set, makes the condition about that one file of the
	// model (subject FileSubject): the file is refused, the model goes on.
	File string
}
