package config

import (
	"errors"

	"plumb/engine"
)

// Weighted fits, group poolability and the form_lapse alert.
//
//	[[model]]
//	weights = "inverse(conc^2)"   # or a column of weights, "w"
//	pool_level = 0.25             # poolability tests (one group, one numeric predictor)
//
//	[model.alerts.form_lapse]
//	level = 0.01                  # a check is significant below this p
//	refreshes = 2                 # consecutive significant refreshes that open it

// FormLapse is the form_lapse alert rule of a model.
type FormLapse struct {
	Rule
	// Level: a check of the model form is significant when its p-value
	// is below it. Default 0.01.
	Level float64 `toml:"level"`
	// Refreshes: the alert opens when a check is significant on this
	// many consecutive refreshes. Default 2.
	Refreshes int `toml:"refreshes"`
}

// Defaults of the form keys.
const (
	DefaultFormLevel     = 0.01
	DefaultFormRefreshes = 2
	DefaultPoolLevel     = 0.25
)

// Weighting parses the model's weights key (engine.ParseWeighting); the
// zero Weighting when unset.
func (m *Model) Weighting() (engine.Weighting, error) {
	return engine.ParseWeighting(m.Weights)
}

// formDefaults fills the form keys' defaults.
func formDefaults(m *Model) {
	if m.Alerts.FormLapse.Enabled == nil {
		m.Alerts.FormLapse.Enabled = ptr(true)
	}
	defSev(&m.Alerts.FormLapse.Rule, "warning")
	if m.Alerts.FormLapse.Level == 0 {
		m.Alerts.FormLapse.Level = DefaultFormLevel
	}
	if m.Alerts.FormLapse.Refreshes == 0 {
		m.Alerts.FormLapse.Refreshes = DefaultFormRefreshes
	}
	if m.PoolLevel == 0 {
		m.PoolLevel = DefaultPoolLevel
	}
}

// validateForm checks the form keys of model i.
func (v *validator) validateForm(i int, m *Model) {
	at := func(k ...string) []string { return append([]string{"model"}, k...) }
	if _, err := m.Weighting(); err != nil {
		msg := err.Error()
		var te *engine.TermError
		if errors.As(err, &te) {
			msg = te.Msg
		}
		v.add(at("weights"), i, ErrBadValue, "%q: %s (want a column of weights, or inverse(x) / inverse(x^2) for w = 1/x, 1/x^2)", m.Weights, msg)
	}
	if !(m.PoolLevel > 0 && m.PoolLevel < 1) {
		v.add(at("pool_level"), i, ErrBadValue, "must lie strictly between 0 and 1, got %v", m.PoolLevel)
	}
	f := m.Alerts.FormLapse
	if !oneOf(f.Severity, "info", "warning", "critical") {
		v.add(at("alerts", "form_lapse", "severity"), i, ErrBadValue, "want info, warning or critical, got %q", f.Severity)
	}
	if !(f.Level > 0 && f.Level < 1) {
		v.add(at("alerts", "form_lapse", "level"), i, ErrBadValue, "must lie strictly between 0 and 1, got %v", f.Level)
	}
	if f.Refreshes < 1 {
		v.add(at("alerts", "form_lapse", "refreshes"), i, ErrBadValue, "must be at least 1, got %d", f.Refreshes)
	}
}
