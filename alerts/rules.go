package alerts

import (
	"errors"
	"fmt"
	"math"
	"time"

	"plumb/engine"
)

// Sentinels wrapped by ConfigError.
var (
	// ErrMissing: a required setting is empty.
	ErrMissing = errors.New("missing")
	// ErrInvalid: a setting has a value outside its domain.
	ErrInvalid = errors.New("invalid value")
	// ErrConflict: two settings exclude each other, or a name repeats.
	ErrConflict = errors.New("conflicting settings")
)

// ConfigError is a validation error of one setting. Section names where the
// setting lives (e.g. `route "oncall"` or "rules.drift"), Field its key as
// written in the config file (e.g. "url"). It wraps ErrMissing, ErrInvalid
// or ErrConflict.
type ConfigError struct {
	Section string
	Field   string
	Msg     string
	Err     error
}

func (e *ConfigError) Error() string {
	s := "alerts: " + e.Section + ": " + e.Field + ": " + e.Err.Error()
	if e.Msg != "" {
		s += ": " + e.Msg
	}
	return s
}

func (e *ConfigError) Unwrap() error { return e.Err }

func cfgErr(section, field string, err error, format string, args ...any) *ConfigError {
	return &ConfigError{Section: section, Field: field, Err: err, Msg: fmt.Sprintf(format, args...)}
}

// Rule holds what every kind's rule has.
type Rule struct {
	Enabled  bool     `toml:"enabled" json:"enabled"`
	Severity Severity `toml:"severity" json:"severity"`
	// Renotify is how long an open alert waits before Tick sends a
	// reminder; 0 sends none.
	Renotify time.Duration `toml:"renotify" json:"renotify"`
}

// PointRule configures suspect-point alerts. A row is suspect when it is an
// outlier and influential:
//
//   - outlier: a crossed measure of the configured Test ("bonferroni" ->
//     "outlier_p_bonferroni", "grubbs" -> "grubbs"); when the condition
//     carries no measure of the test family, its Outlier flag;
//   - influential: a crossed measure named in Influence (by default
//     "cooks_distance" and "dffits"); when the condition carries no
//     measure of those names and no leverage/DFBETAS/COVRATIO measure,
//     its Influential flag.
//
// So a high-leverage row that fits (only "leverage" crossed) and an outlier
// whose removal barely moves the fit raise nothing.
type PointRule struct {
	Rule
	Test      string   `toml:"test" json:"test"`
	Influence []string `toml:"influence" json:"influence"`
}

// FragilityRule configures fragile-fit alerts: the alert opens when the
// fragility index is between 1 and Limit and resolves when it rises above
// Limit (or no removal changes the conclusion).
type FragilityRule struct {
	Rule
	Limit int `toml:"limit" json:"limit"`
}

// DriftRule configures drift alerts. A quantity is out of band when it has
// moved from baseline by more than its Tolerance (in its own units) when
// one is configured for its name, otherwise by more than K standard errors.
// BaselineRows tells the daemon which fit is the baseline when none is
// pinned: the fit after the first BaselineRows rows.
type DriftRule struct {
	Rule
	K            float64            `toml:"k" json:"k"`
	Tolerance    map[string]float64 `toml:"tolerance" json:"tolerance,omitempty"`
	BaselineRows int                `toml:"baseline_rows" json:"baseline_rows"`
}

// BlockedRule configures blocked alerts. Silence is how long a feed may go
// without a row before Tick opens a blocked alert for it; 0 disables the
// silence check.
type BlockedRule struct {
	Rule
	Silence time.Duration `toml:"silence" json:"silence"`
}

// Rules holds one rule per kind. Start from DefaultRules and change what
// the config names (the TOML layer decodes onto the defaults).
type Rules struct {
	SuspectPoint PointRule     `toml:"suspect_point" json:"suspect_point"`
	FragileFit   FragilityRule `toml:"fragile_fit" json:"fragile_fit"`
	Drift        DriftRule     `toml:"drift" json:"drift"`
	Blocked      BlockedRule   `toml:"blocked" json:"blocked"`
	FormLapse    FormRule      `toml:"form_lapse" json:"form_lapse"`
}

// Defaults of the rules.
const (
	DefaultRenotify     = 4 * time.Hour
	DefaultFragileLimit = 2
	DefaultDriftK       = 3
	DefaultBaselineRows = 20
	DefaultSilence      = 0
)

// DefaultRules returns every kind enabled: suspect points, fragile fits and
// blocked models at warning, drift at critical, reminders every 4 hours,
// the Bonferroni test with Cook's distance and DFFITS, fragility limit 2,
// drift band 3 standard errors against the fit after 20 rows, no silence
// check.
func DefaultRules() Rules {
	base := func(s Severity) Rule { return Rule{Enabled: true, Severity: s, Renotify: DefaultRenotify} }
	return Rules{
		SuspectPoint: PointRule{Rule: base(SeverityWarning), Test: "bonferroni",
			Influence: []string{engine.MeasureCook, engine.MeasureDFFITS}},
		FragileFit: FragilityRule{Rule: base(SeverityWarning), Limit: DefaultFragileLimit},
		Drift:      DriftRule{Rule: base(SeverityCritical), K: DefaultDriftK, BaselineRows: DefaultBaselineRows},
		Blocked:    BlockedRule{Rule: base(SeverityWarning), Silence: DefaultSilence},
		FormLapse:  FormRule{Rule: base(SeverityWarning), Level: DefaultFormLevel, Refreshes: DefaultFormRefreshes},
	}
}

var influenceNames = map[string]bool{
	"cooks_distance": true, "dffits": true, "dfbetas": true, "covratio": true, "leverage": true,
}

func (r Rule) validate(section string) error {
	if !r.Severity.Valid() {
		return cfgErr(section, "severity", ErrInvalid, "%q (want info, warning or critical)", r.Severity)
	}
	if r.Renotify < 0 {
		return cfgErr(section, "renotify", ErrInvalid, "%v is negative", r.Renotify)
	}
	return nil
}

// Validate checks every rule; the error names the rule and the field.
func (r Rules) Validate() error {
	if err := r.SuspectPoint.validate("rules.suspect_point"); err != nil {
		return err
	}
	if r.SuspectPoint.Test != "bonferroni" && r.SuspectPoint.Test != "grubbs" {
		return cfgErr("rules.suspect_point", "test", ErrInvalid, "%q (want bonferroni or grubbs)", r.SuspectPoint.Test)
	}
	if len(r.SuspectPoint.Influence) == 0 {
		return cfgErr("rules.suspect_point", "influence", ErrMissing, "name at least one measure")
	}
	for _, n := range r.SuspectPoint.Influence {
		if !influenceNames[n] {
			return cfgErr("rules.suspect_point", "influence", ErrInvalid,
				"%q (want cooks_distance, dffits, dfbetas, covratio or leverage)", n)
		}
	}
	if err := r.FragileFit.validate("rules.fragile_fit"); err != nil {
		return err
	}
	if r.FragileFit.Limit < 1 {
		return cfgErr("rules.fragile_fit", "limit", ErrInvalid, "%d (want 1 or more)", r.FragileFit.Limit)
	}
	if err := r.Drift.validate("rules.drift"); err != nil {
		return err
	}
	if !(r.Drift.K > 0) || math.IsInf(r.Drift.K, 0) {
		return cfgErr("rules.drift", "k", ErrInvalid, "%v (want a positive number)", r.Drift.K)
	}
	for name, tol := range r.Drift.Tolerance {
		if !(tol > 0) || math.IsInf(tol, 0) {
			return cfgErr("rules.drift", "tolerance", ErrInvalid, "%q = %v (want a positive number)", name, tol)
		}
	}
	if r.Drift.BaselineRows < 0 {
		return cfgErr("rules.drift", "baseline_rows", ErrInvalid, "%d is negative", r.Drift.BaselineRows)
	}
	if err := r.Blocked.validate("rules.blocked"); err != nil {
		return err
	}
	if r.Blocked.Silence < 0 {
		return cfgErr("rules.blocked", "silence", ErrInvalid, "%v is negative", r.Blocked.Silence)
	}
	return r.FormLapse.validate()
}

func (r Rules) rule(k Kind) Rule {
	switch k {
	case KindSuspectPoint:
		return r.SuspectPoint.Rule
	case KindFragileFit:
		return r.FragileFit.Rule
	case KindDrift:
		return r.Drift.Rule
	case KindBlocked:
		return r.Blocked.Rule
	case KindFormLapse:
		return r.FormLapse.Rule
	}
	return Rule{}
}

func testMeasure(test string) string {
	if test == "grubbs" {
		return "grubbs"
	}
	return "outlier_p_bonferroni"
}

// suspect applies the point rule to a condition.
func (r PointRule) suspect(c PointCondition) (outlier, influential bool) {
	var sawTest, sawInfl bool
	want := testMeasure(r.Test)
	for _, m := range c.Measures {
		switch {
		case m.Family == engine.FamilyTest || m.Measure == engine.MeasureBonferroni || m.Measure == engine.MeasureGrubbs:
			sawTest = true
			if m.Measure == want {
				outlier = true
			}
		case influenceNames[m.Measure]:
			sawInfl = true
			for _, n := range r.Influence {
				if n == m.Measure {
					influential = true
				}
			}
		}
	}
	if !sawTest {
		outlier = c.Outlier
	}
	if !sawInfl {
		influential = c.Influential
	}
	return outlier, influential
}

// band applies the drift rule to one measure, filling its computed fields.
func (r DriftRule) band(m *DriftMeasure) {
	m.Difference = m.Current - m.Baseline
	if tol, ok := r.Tolerance[m.Name]; ok {
		m.Rule, m.Band = "tolerance", tol
	} else {
		m.Rule, m.Band = "k_se", r.K*m.StdError
	}
	d := math.Abs(m.Difference)
	switch {
	case math.IsNaN(d) || math.IsNaN(m.Band) || m.Band <= 0:
		// Undefined difference or band: nothing to judge.
		m.InBand = true
	default:
		m.InBand = d <= m.Band
	}
}
