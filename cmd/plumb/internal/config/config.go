// Package config reads and validates plumb's TOML configuration.
//
// The file names a state database, an optional HTTP listener, the models to
// keep watch over and the routes that alerts travel by. Every key has a
// default (see Default and the README's configuration reference); relative
// paths are resolved against the directory of the config file.
//
// Parse rejects unknown keys and wrong types, and Validate rejects bad
// values; both report errors as *Error, which names the key and the line of
// the file it stands on.
package config

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"net"
	"net/url"
	"os"
	"path/filepath"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/BurntSushi/toml"

	"plumb/store/backend"
)

// Config is the whole configuration file.
type Config struct {
	// State is where the history lives: a SQLite file (a path, default
	// "plumb.db") or a PostgreSQL URL ("postgres://host:port/db?...") shared
	// by several daemons. A URL must not carry a password.
	State string `toml:"state"`
	// StateEnv names an environment variable holding the whole state
	// setting (a URL with its password, say); when set it replaces State.
	StateEnv string `toml:"state_env"`
	// Listen is the HTTP address of the status API, metrics and dashboard.
	// Default "127.0.0.1:8765"; "" turns the server off.
	Listen string `toml:"listen"`
	// TokenEnv names an environment variable holding the bearer token that
	// acknowledging or resolving an alert over HTTP requires.
	TokenEnv string `toml:"token_env"`
	// PublicNames are the host names (or addresses) under which other
	// machines reach the HTTP server, such as a reverse proxy's name. A
	// request is served only when its Host is one of them, the host of
	// Listen or a localhost name; others are refused (421), which keeps
	// pages of other sites from reading the API through DNS rebinding.
	// Names only: no scheme, port, path or wildcard. Default none.
	PublicNames []string `toml:"public_names"`
	// PublicURL is the dashboard's address as people reach it, e.g.
	// "https://plumb.lab.example" (http or https, no query). When set,
	// every alert carries the URL of its page there ("url" in the event
	// data), and its host is served like a public name. Default none.
	PublicURL string `toml:"public_url"`
	// LogFormat is "text" (default) or "json".
	LogFormat string `toml:"log_format"`
	// LogLevel is "debug", "info" (default), "warn" or "error".
	LogLevel string `toml:"log_level"`

	Watch  Watch   `toml:"watch"`
	Models []Model `toml:"model"`
	Routes []Route `toml:"route"`

	// Named users, the trusted proxy and the longest quiet period: see
	// access.go.
	Users    []User   `toml:"user"`
	Proxy    *Proxy   `toml:"proxy"`
	QuietMax Duration `toml:"quiet_max"`

	// Dir is the directory of the config file, against which relative
	// paths resolve. It is set by Load, not read from the file.
	Dir string `toml:"-"`
	// Path is the config file's path as given to Load.
	Path string `toml:"-"`
	// lines locates keys in the source for error messages.
	lines *locator
}

// Watch tunes the folder watcher for all models.
type Watch struct {
	// Debounce is how long events for a file are merged before it is read.
	// Default 50ms.
	Debounce Duration `toml:"debounce"`
	// IdleFlush is how long a file must stay unchanged before a last line
	// without its newline is taken as complete. Default 30s.
	IdleFlush Duration `toml:"idle_flush"`
	// Rescan is the interval of the safety-net rescan of every folder.
	// Default 30s.
	Rescan Duration `toml:"rescan"`
	// Refresh is the least time between two full refreshes (influence
	// table and fragility) of one model; a burst of rows costs one refresh.
	// Default 1s.
	Refresh Duration `toml:"refresh"`
}

// Model is one regression model kept under watch.
type Model struct {
	Name string `toml:"name"`
	// Folder is watched for files matching Pattern.
	Folder    string `toml:"folder"`
	Pattern   string `toml:"pattern"`   // default "*.csv"
	Recursive bool   `toml:"recursive"` // watch subfolders too; default false

	Response  string   `toml:"response"`
	Terms     []string `toml:"terms"`
	Intercept *bool    `toml:"intercept"` // default true
	// Weights makes the fit weighted: a column of weights, or
	// inverse(x) / inverse(x^2) (form.go). Default unweighted.
	Weights string `toml:"weights"`
	// PoolLevel is the level of the poolability tests. Default 0.25.
	PoolLevel float64 `toml:"pool_level"`

	// CSV dialect.
	Delimiter    string `toml:"delimiter"`     // one character; default ","
	Comment      string `toml:"comment"`       // lines starting with it are skipped; default none
	DecimalComma bool   `toml:"decimal_comma"` // "3,14" means 3.14; default false
	// Missing lists the cell texts that mean "no value" ("NA", "" for an
	// empty cell); a row with one in a column the model uses is left out
	// and counted as missing. Default none.
	Missing []string `toml:"missing"`

	// Filter keeps only rows whose column holds one of the values.
	Filter *Filter `toml:"filter"`
	// IDColumn names a column whose text labels each row (a serial
	// number, a sample id) wherever the row is shown. Default none.
	IDColumn string `toml:"id_column"`

	// TimeColumn names a timestamp column (RFC 3339, or TimeLayout).
	TimeColumn string `toml:"time_column"`
	// TimeLayout is a Go time layout for TimeColumn; default RFC 3339.
	TimeLayout string `toml:"time_layout"`

	// Window limits the rows a fit uses: the last Rows rows, or the rows
	// whose time lies within Span of the newest. Default: all rows.
	Window Window `toml:"window"`

	// MinRows is the number of rows before the model is judged. Default
	// is the number of coefficients + 5.
	MinRows int `toml:"min_rows"`

	Judge       Judge                `toml:"judge"`
	Fragility   Fragility            `toml:"fragility"`
	Region      map[string][]float64 `toml:"region"`
	Checkpoints []Checkpoint         `toml:"checkpoint"`
	Suggest     Suggest              `toml:"suggest"`
	Alerts      ModelAlerts          `toml:"alerts"`

	// Units gives the unit of each column by name ("°C", "mV"), shown
	// with its values on charts, in alerts, the report and the API.
	// Default none.
	Units map[string]string `toml:"units"`
	// Calibration lists the points to predict and the readings to invert
	// at every refresh (config_calib.go).
	Calibration Calibration `toml:"calibration"`

	// Routes names the routes this model's alerts go to; default all.
	Routes []string `toml:"routes"`
}

// Filter keeps rows by a column's value.
type Filter struct {
	Column string   `toml:"column"`
	Values []string `toml:"values"`
}

// Window limits the rows of a fit.
type Window struct {
	Rows int      `toml:"rows"`
	Span Duration `toml:"span"`
}

// Judge selects the judgement cutoffs.
type Judge struct {
	// Cutoffs is "absolute" (default) or "size_adjusted": which family of
	// rule-of-thumb cutoffs decides that a point is influential.
	Cutoffs string `toml:"cutoffs"`
	// CookRule is "f_median" (default: Cook's distance above the median of
	// F(p, n-p)) or "one" (above 1).
	CookRule string `toml:"cook_rule"`
	// Alpha is the significance level of the outlier test. Default 0.05.
	Alpha float64 `toml:"alpha"`
	// OutlierTest is "bonferroni" (default) or "grubbs".
	OutlierTest string `toml:"outlier_test"`
}

// Fragility configures the fragility search.
type Fragility struct {
	Enabled    *bool `toml:"enabled"`     // default true
	MaxRemoved int   `toml:"max_removed"` // default 3
	Limit      int   `toml:"limit"`       // fragile when index <= limit; default 2
	// Bands: coefficients that must stay within K standard errors of their
	// full-data value.
	Bands []Band `toml:"band"`
}

// Band is a coefficient conclusion.
type Band struct {
	Term string  `toml:"term"`
	K    float64 `toml:"k"`
}

// Checkpoint is a prediction that users rely on.
type Checkpoint struct {
	Name      string             `toml:"name"`
	At        map[string]float64 `toml:"at"`
	Tolerance float64            `toml:"tolerance"`
}

// Suggest configures the search for where to collect more data.
type Suggest struct {
	Replicates int `toml:"replicates"` // default 3
	Count      int `toml:"count"`      // suggestions kept; default 3
}

// ModelAlerts holds the per-kind alert rules of a model.
type ModelAlerts struct {
	SuspectPoint Rule      `toml:"suspect_point"`
	FragileFit   Rule      `toml:"fragile_fit"`
	Drift        Drift     `toml:"drift"`
	Blocked      Rule      `toml:"blocked"`
	FormLapse    FormLapse `toml:"form_lapse"`
	// Renotify is how often a still-open alert is sent again. Default 0
	// (never).
	Renotify Duration `toml:"renotify"`
	// Silence raises a blocked alert when no row has arrived for this long.
	// Default 0 (off).
	Silence Duration `toml:"silence"`
}

// Rule switches one alert kind and sets its severity.
type Rule struct {
	Enabled  *bool  `toml:"enabled"`  // default true
	Severity string `toml:"severity"` // "info", "warning" or "critical"
}

// Drift is the calibration drift rule.
type Drift struct {
	Rule
	// K is the band in standard errors around the baseline. Default 3.
	K float64 `toml:"k"`
	// Tolerance, when set, is the band of checkpoint predictions in the
	// response's units.
	Tolerance float64 `toml:"tolerance"`
	// BaselineRows: the baseline is the fit after this many rows. Default
	// 30.
	BaselineRows int `toml:"baseline_rows"`
	// Pinned, when set, fixes the baseline coefficients by term.
	Pinned map[string]float64 `toml:"pinned"`
}

// Route is one way alerts leave plumb.
type Route struct {
	Name string `toml:"name"`
	Kind string `toml:"kind"` // "log", "file", "webhook", "command"

	URL        string   `toml:"url"`         // webhook
	SecretEnv  string   `toml:"secret_env"`  // webhook signing secret, from the environment
	SecretFile string   `toml:"secret_file"` // or from a file
	Path       string   `toml:"path"`        // file
	Argv       []string `toml:"argv"`        // command

	Timeout     Duration `toml:"timeout"`      // default 10s
	MaxAttempts int      `toml:"max_attempts"` // default 8
	Backoff     Duration `toml:"backoff"`      // first retry delay; default 2s
	// RatePerMinute caps events sent by this route. Default 30.
	RatePerMinute int `toml:"rate_per_minute"`

	// Filters: which alerts take this route (default all).
	Kinds       []string `toml:"kinds"`
	MinSeverity string   `toml:"min_severity"`
}

// Duration is a time.Duration written as a string ("90s", "4h").
type Duration struct{ time.Duration }

// UnmarshalText parses a Go duration string.
func (d *Duration) UnmarshalText(b []byte) error {
	v, err := time.ParseDuration(string(b))
	if err != nil {
		return fmt.Errorf("not a duration (use forms like \"90s\", \"15m\", \"4h\"): %q", b)
	}
	d.Duration = v
	return nil
}

// MarshalText writes the duration as a Go duration string.
func (d Duration) MarshalText() ([]byte, error) { return []byte(d.String()), nil }

// Error is a configuration error that names the key and its line.
type Error struct {
	File string
	Line int    // 0 when unknown
	Key  string // dotted key path, e.g. "model[2].judge.alpha"
	Err  error
}

func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
	}
	if e.Key != "" {
		fmt.Fprintf(&b, ": %s", e.Key)
	}
	fmt.Fprintf(&b, ": %v", e.Err)
	return b.String()
}

func (e *Error) Unwrap() error { return e.Err }

// Sentinels wrapped by *Error.
var (
	ErrUnknownKey = errors.New("unknown key")
	ErrBadValue   = errors.New("bad value")
	ErrMissing    = errors.New("missing")
	ErrSyntax     = errors.New("syntax")
)

// Errors is a list of configuration errors, all reported at once.
type Errors []*Error

func (es Errors) Error() string {
	parts := make([]string, len(es))
	for i, e := range es {
		parts[i] = e.Error()
	}
	return strings.Join(parts, "\n")
}

// Unwrap lets errors.Is and errors.As see every error.
func (es Errors) Unwrap() []error {
	out := make([]error, len(es))
	for i, e := range es {
		out[i] = e
	}
	return out
}

// Load reads, parses, defaults and validates the file at path.
func Load(path string) (*Config, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	abs, err := filepath.Abs(path)
	if err != nil {
		return nil, err
	}
	c, err := Parse(f, path)
	if err != nil {
		return nil, err
	}
	c.Dir = filepath.Dir(abs)
	c.Path = path
	if err := c.Validate(); err != nil {
		return nil, err
	}
	return c, nil
}

// Parse decodes TOML from r; name is used in error messages. Unknown keys
// and type mismatches are errors. Parse applies defaults but does not
// validate values (Validate does) and does not resolve paths.
func Parse(r io.Reader, name string) (*Config, error) {
	src, err := io.ReadAll(r)
	if err != nil {
		return nil, err
	}
	c := Default()
	c.lines = newLocator(src)
	md, err := toml.NewDecoder(bytes.NewReader(src)).Decode(c)
	if err != nil {
		var pe toml.ParseError
		if errors.As(err, &pe) {
			return nil, &Error{File: name, Line: pe.Position.Line, Key: pe.LastKey, Err: fmt.Errorf("%w: %s", ErrSyntax, pe.Message)}
		}
		// Type mismatches come as plain errors of the form
		// `toml: line N (last key "a.b"): ...`.
		e := &Error{File: name, Err: fmt.Errorf("%w: %v", ErrSyntax, err)}
		if m := typeErrRe.FindStringSubmatch(err.Error()); m != nil {
			e.Line, _ = strconv.Atoi(m[1])
			e.Key = m[2]
			e.Err = fmt.Errorf("%w: %s", ErrSyntax, strings.TrimSpace(m[3]))
		}
		return nil, e
	}
	var errs Errors
	for _, k := range md.Undecoded() {
		path := []string(k)
		errs = append(errs, &Error{File: name, Line: c.lines.find(path), Key: k.String(), Err: ErrUnknownKey})
	}
	if len(errs) > 0 {
		return nil, errs
	}
	c.Path = name
	c.applyDefaults()
	return c, nil
}

var typeErrRe = regexp.MustCompile(`^toml: line (\d+) \(last key "([^"]*)"\):(.*)$`)

// Default returns a configuration with every default set and no models.
func Default() *Config {
	return &Config{
		State:     "plumb.db",
		Listen:    "127.0.0.1:8765",
		LogFormat: "text",
		LogLevel:  "info",
		Watch: Watch{
			Debounce:  Duration{50 * time.Millisecond},
			IdleFlush: Duration{30 * time.Second},
			Rescan:    Duration{30 * time.Second},
			Refresh:   Duration{time.Second},
		},
	}
}

func (c *Config) applyDefaults() {
	c.applyAccessDefaults()
	for i := range c.Models {
		m := &c.Models[i]
		if m.Pattern == "" {
			m.Pattern = "*.csv"
		}
		if m.Intercept == nil {
			m.Intercept = ptr(true)
		}
		if m.Delimiter == "" {
			m.Delimiter = ","
		}
		if m.Judge.Cutoffs == "" {
			m.Judge.Cutoffs = "absolute"
		}
		if m.Judge.CookRule == "" {
			m.Judge.CookRule = "f_median"
		}
		if m.Judge.Alpha == 0 {
			m.Judge.Alpha = 0.05
		}
		if m.Judge.OutlierTest == "" {
			m.Judge.OutlierTest = "bonferroni"
		}
		if m.Fragility.Enabled == nil {
			m.Fragility.Enabled = ptr(true)
		}
		if m.Fragility.MaxRemoved == 0 {
			m.Fragility.MaxRemoved = 3
		}
		if m.Fragility.Limit == 0 {
			m.Fragility.Limit = 2
		}
		if m.Suggest.Replicates == 0 {
			m.Suggest.Replicates = 3
		}
		if m.Suggest.Count == 0 {
			m.Suggest.Count = 3
		}
		for _, r := range []*Rule{&m.Alerts.SuspectPoint, &m.Alerts.FragileFit, &m.Alerts.Drift.Rule, &m.Alerts.Blocked} {
			if r.Enabled == nil {
				r.Enabled = ptr(true)
			}
		}
		defSev(&m.Alerts.SuspectPoint, "critical")
		defSev(&m.Alerts.FragileFit, "warning")
		defSev(&m.Alerts.Drift.Rule, "warning")
		defSev(&m.Alerts.Blocked, "warning")
		if m.Alerts.Drift.K == 0 {
			m.Alerts.Drift.K = 3
		}
		if m.Alerts.Drift.BaselineRows == 0 {
			m.Alerts.Drift.BaselineRows = 30
		}
		m.Calibration.applyDefaults()
		formDefaults(m)
	}
	for i := range c.Routes {
		r := &c.Routes[i]
		if r.Timeout.Duration == 0 {
			r.Timeout.Duration = 10 * time.Second
		}
		if r.MaxAttempts == 0 {
			r.MaxAttempts = 8
		}
		if r.Backoff.Duration == 0 {
			r.Backoff.Duration = 2 * time.Second
		}
		if r.RatePerMinute == 0 {
			r.RatePerMinute = 30
		}
	}
}

func defSev(r *Rule, s string) {
	if r.Severity == "" {
		r.Severity = s
	}
}

func ptr[T any](v T) *T { return &v }

// Resolve returns p resolved against the config file's directory. A
// PostgreSQL URL (a state setting) is returned unchanged.
func (c *Config) Resolve(p string) string {
	if backend.IsPostgres(p) {
		return p
	}
	if p == "" || filepath.IsAbs(p) || c.Dir == "" {
		return p
	}
	return filepath.Join(c.Dir, p)
}

// MinRowsFor returns the model's effective minimum row count given its
// number of coefficients p: min_rows (default p + 5), raised to p + 2 when
// below, the fewest rows whose fit leaves a residual degree of freedom
// once one row is set aside (the externally studentized residual needs
// it).
func (m *Model) MinRowsFor(p int) int {
	n := m.MinRows
	if n <= 0 {
		n = p + 5
	}
	return max(n, p+2)
}

// ModelCheck checks what only another package can: a model's terms (the
// engine parses them). It returns the model's number of coefficients, or
// the error (an engine.TermError, for instance).
type ModelCheck func(m *Model) (coefficients int, err error)

// ModelKeyError is a ModelCheck error about a key of the model other than
// its terms (e.g. Key ["calibration"]): it is reported at that key's line,
// as the model's error; Err's text names the key.
type ModelKeyError struct {
	Key []string
	Err error
}

func (e *ModelKeyError) Error() string { return e.Err.Error() }
func (e *ModelKeyError) Unwrap() error { return e.Err }

// LoadChecked is Load with every model also checked by check: a bad term
// is reported at its line with every other problem of the file, in one
// error. Notes says what plumb will do other than the file says (a
// min_rows raised to what the model needs); they come with the error too.
func LoadChecked(path string, check ModelCheck) (c *Config, notes []string, err error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close()
	abs, err := filepath.Abs(path)
	if err != nil {
		return nil, nil, err
	}
	c, err = Parse(f, path)
	if err != nil {
		return nil, nil, err
	}
	c.Dir = filepath.Dir(abs)
	c.Path = path
	notes, err = c.validate(check)
	if err != nil {
		return nil, notes, err
	}
	return c, notes, nil
}

// Validate checks every value and reports all problems at once.
func (c *Config) Validate() error {
	_, err := c.validate(nil)
	return err
}

// validate is Validate, each model also checked by check when not nil.
func (c *Config) validate(check ModelCheck) (notes []string, err error) {
	v := validator{c: c}
	if c.StateEnv != "" {
		// The variable's URL may carry the password: that is its purpose.
		if s, err := backend.StateFromEnv(c.StateEnv); err != nil {
			v.add([]string{"state_env"}, -1, ErrBadValue, "%v", err)
		} else {
			c.State = s
		}
	} else if err := backend.CheckState(c.State); err != nil {
		v.add([]string{"state"}, -1, ErrBadValue, "%v", err)
	}
	if c.State == "" {
		v.add([]string{"state"}, -1, ErrMissing, "the state path or URL is required")
	}
	if !oneOf(c.LogFormat, "text", "json") {
		v.add([]string{"log_format"}, -1, ErrBadValue, "want \"text\" or \"json\", got %q", c.LogFormat)
	}
	if !oneOf(c.LogLevel, "debug", "info", "warn", "error") {
		v.add([]string{"log_level"}, -1, ErrBadValue, "want debug, info, warn or error, got %q", c.LogLevel)
	}
	for _, n := range c.PublicNames {
		if msg := checkPublicName(n); msg != "" {
			v.add([]string{"public_names"}, -1, ErrBadValue, "%q: %s", n, msg)
		}
	}
	if c.PublicURL != "" {
		if msg := checkPublicURL(c.PublicURL); msg != "" {
			v.add([]string{"public_url"}, -1, ErrBadValue, "%q: %s", c.PublicURL, msg)
		}
	}
	for _, d := range []struct {
		key string
		val time.Duration
	}{{"debounce", c.Watch.Debounce.Duration}, {"idle_flush", c.Watch.IdleFlush.Duration}, {"rescan", c.Watch.Rescan.Duration}, {"refresh", c.Watch.Refresh.Duration}} {
		if d.val < 0 {
			v.add([]string{"watch", d.key}, -1, ErrBadValue, "must not be negative")
		}
	}
	routes := map[string]bool{}
	for i, r := range c.Routes {
		at := func(k ...string) []string { return append([]string{"route"}, k...) }
		if r.Name == "" {
			v.add(at("name"), i, ErrMissing, "every route needs a name")
		} else if routes[r.Name] {
			v.add(at("name"), i, ErrBadValue, "route %q is defined twice", r.Name)
		}
		routes[r.Name] = true
		switch r.Kind {
		case "log":
		case "file":
			if r.Path == "" {
				v.add(at("path"), i, ErrMissing, "a file route needs a path")
			}
		case "webhook":
			if !strings.HasPrefix(r.URL, "http://") && !strings.HasPrefix(r.URL, "https://") {
				v.add(at("url"), i, ErrBadValue, "a webhook route needs an http:// or https:// url, got %q", r.URL)
			}
			if r.SecretEnv != "" && r.SecretFile != "" {
				v.add(at("secret_file"), i, ErrBadValue, "set secret_env or secret_file, not both")
			}
		case "command":
			if len(r.Argv) == 0 || r.Argv[0] == "" {
				v.add(at("argv"), i, ErrMissing, "a command route needs argv, the program and its arguments")
			}
		case "":
			v.add(at("kind"), i, ErrMissing, "want one of log, file, webhook, command")
		default:
			v.add(at("kind"), i, ErrBadValue, "want one of log, file, webhook, command, got %q", r.Kind)
		}
		if r.Timeout.Duration <= 0 {
			v.add(at("timeout"), i, ErrBadValue, "must be positive")
		}
		if r.MaxAttempts < 1 {
			v.add(at("max_attempts"), i, ErrBadValue, "must be at least 1")
		}
		if r.RatePerMinute < 1 {
			v.add(at("rate_per_minute"), i, ErrBadValue, "must be at least 1")
		}
		if r.MinSeverity != "" && !oneOf(r.MinSeverity, "info", "warning", "critical") {
			v.add(at("min_severity"), i, ErrBadValue, "want info, warning or critical, got %q", r.MinSeverity)
		}
		for _, k := range r.Kinds {
			if !oneOf(k, AlertKinds...) {
				v.add(at("kinds"), i, ErrBadValue, "unknown alert kind %q (want %s)", k, strings.Join(AlertKinds, ", "))
			}
		}
	}
	names := map[string]bool{}
	for i := range c.Models {
		m := &c.Models[i]
		at := func(k ...string) []string { return append([]string{"model"}, k...) }
		switch {
		case m.Name == "":
			v.add(at("name"), i, ErrMissing, "every model needs a name")
		case names[m.Name]:
			v.add(at("name"), i, ErrBadValue, "model %q is defined twice", m.Name)
		case strings.ContainsAny(m.Name, "/\\:\x00") || strings.TrimSpace(m.Name) != m.Name:
			v.add(at("name"), i, ErrBadValue, "a model name may not hold '/', '\\', ':' or surrounding spaces: %q", m.Name)
		}
		names[m.Name] = true
		if m.Folder == "" {
			v.add(at("folder"), i, ErrMissing, "the folder to watch is required")
		}
		if _, err := filepath.Match(m.Pattern, "x"); err != nil {
			v.add(at("pattern"), i, ErrBadValue, "bad glob pattern %q: %v", m.Pattern, err)
		}
		if m.Response == "" {
			v.add(at("response"), i, ErrMissing, "the response column is required")
		}
		if len(m.Terms) == 0 {
			v.add(at("terms"), i, ErrMissing, "at least one term is required")
		}
		var de *DialectError
		if err := CheckDialect(m.Delimiter, m.DecimalComma, m.Comment, m.Missing); errors.As(err, &de) {
			v.add(at(de.Key), i, ErrBadValue, "%v", de.Err)
		}
		if m.Filter != nil && (m.Filter.Column == "" || len(m.Filter.Values) == 0) {
			v.add(at("filter"), i, ErrMissing, "a filter needs a column and at least one value")
		}
		if m.Window.Rows < 0 {
			v.add(at("window", "rows"), i, ErrBadValue, "must not be negative")
		}
		if m.Window.Span.Duration < 0 {
			v.add(at("window", "span"), i, ErrBadValue, "must not be negative")
		}
		if m.Window.Span.Duration > 0 && m.TimeColumn == "" {
			v.add(at("window", "span"), i, ErrMissing, "a time window needs time_column")
		}
		if m.Window.Rows > 0 && m.Window.Span.Duration > 0 {
			v.add(at("window"), i, ErrBadValue, "set rows or span, not both")
		}
		if m.MinRows < 0 {
			v.add(at("min_rows"), i, ErrBadValue, "must not be negative")
		}
		if _, old, ok := CutoffWords.Parse(m.Judge.Cutoffs); !ok || old {
			v.add(at("judge", "cutoffs"), i, ErrBadValue, "want %s, got %q", CutoffWords.Choices(), m.Judge.Cutoffs)
		}
		if _, old, ok := CookRuleWords.Parse(m.Judge.CookRule); !ok || old {
			v.add(at("judge", "cook_rule"), i, ErrBadValue, "want %s, got %q", CookRuleWords.Choices(), m.Judge.CookRule)
		}
		if !(m.Judge.Alpha > 0 && m.Judge.Alpha < 1) {
			v.add(at("judge", "alpha"), i, ErrBadValue, "must lie strictly between 0 and 1, got %v", m.Judge.Alpha)
		}
		if !oneOf(m.Judge.OutlierTest, "bonferroni", "grubbs") {
			v.add(at("judge", "outlier_test"), i, ErrBadValue, "want \"bonferroni\" or \"grubbs\", got %q", m.Judge.OutlierTest)
		}
		if m.Fragility.MaxRemoved < 1 || m.Fragility.MaxRemoved > 5 {
			v.add(at("fragility", "max_removed"), i, ErrBadValue, "must be 1 to 5, got %d", m.Fragility.MaxRemoved)
		}
		if m.Fragility.Limit < 1 || m.Fragility.Limit > m.Fragility.MaxRemoved {
			v.add(at("fragility", "limit"), i, ErrBadValue, "must be 1 to max_removed (%d), got %d", m.Fragility.MaxRemoved, m.Fragility.Limit)
		}
		for _, b := range m.Fragility.Bands {
			if b.Term == "" || !(b.K > 0) {
				v.add(at("fragility", "band"), i, ErrBadValue, "a band needs a term and k > 0")
			}
		}
		for name, r := range m.Region {
			if len(r) != 2 || !(r[0] < r[1]) {
				v.add(at("region", name), i, ErrBadValue, "want [low, high] with low < high, got %v", r)
			}
		}
		for _, cp := range m.Checkpoints {
			if len(cp.At) == 0 || !(cp.Tolerance > 0) {
				v.add(at("checkpoint"), i, ErrBadValue, "a checkpoint needs at = {column = value} and tolerance > 0")
			}
		}
		m.Calibration.validate(&v, i)
		for col, u := range m.Units {
			if col == "" || u == "" || strings.ContainsAny(u, "\n\r") {
				v.add(at("units"), i, ErrBadValue, "want column = \"unit\" with a one-line unit, got %q = %q", col, u)
			}
		}
		if m.Suggest.Replicates < 1 || m.Suggest.Replicates > 100 {
			v.add(at("suggest", "replicates"), i, ErrBadValue, "must be 1 to 100")
		}
		if m.Suggest.Count < 1 || m.Suggest.Count > 20 {
			v.add(at("suggest", "count"), i, ErrBadValue, "must be 1 to 20")
		}
		for _, r := range []struct {
			key  string
			rule Rule
		}{{"suspect_point", m.Alerts.SuspectPoint}, {"fragile_fit", m.Alerts.FragileFit}, {"drift", m.Alerts.Drift.Rule}, {"blocked", m.Alerts.Blocked}} {
			if !oneOf(r.rule.Severity, "info", "warning", "critical") {
				v.add(at("alerts", r.key, "severity"), i, ErrBadValue, "want info, warning or critical, got %q", r.rule.Severity)
			}
		}
		if !(m.Alerts.Drift.K > 0) {
			v.add(at("alerts", "drift", "k"), i, ErrBadValue, "must be positive")
		}
		if m.Alerts.Drift.Tolerance < 0 {
			v.add(at("alerts", "drift", "tolerance"), i, ErrBadValue, "must not be negative")
		}
		if m.Alerts.Drift.BaselineRows < 1 {
			v.add(at("alerts", "drift", "baseline_rows"), i, ErrBadValue, "must be at least 1")
		}
		v.validateForm(i, m)
		for _, rn := range m.Routes {
			if !routes[rn] {
				v.add(at("routes"), i, ErrBadValue, "no route is named %q", rn)
			}
		}
	}
	c.validateAccess(&v)
	if check != nil {
		for i := range c.Models {
			m := &c.Models[i]
			p, err := check(m)
			if err != nil {
				var ke *ModelKeyError
				if errors.As(err, &ke) {
					// Placed at the key's line; the error names the key.
					line := 0
					if c.lines != nil {
						line = c.lines.findIndexed(append([]string{"model"}, ke.Key...), i)
					}
					v.errs = append(v.errs, &Error{File: c.Path, Line: line, Key: fmt.Sprintf("model[%d] (model %q)", i+1, m.Name), Err: ke.Err})
					continue
				}
				v.add([]string{"model", "terms"}, i, ErrBadValue, "%v", err)
				continue
			}
			if m.MinRows > 0 && m.MinRowsFor(p) > m.MinRows {
				line := 0
				if c.lines != nil {
					line = c.lines.findIndexed([]string{"model", "min_rows"}, i)
				}
				notes = append(notes, fmt.Sprintf("%s:%d: model[%d].min_rows (model %q): %d is too few for %d coefficients; "+
					"plumb waits for %d rows before judging (a fit needs one row more than its coefficients, and one more "+
					"to judge a row without it)", c.Path, line, i+1, m.Name, m.MinRows, p, m.MinRowsFor(p)))
			}
		}
	}
	if len(v.errs) > 0 {
		sort.SliceStable(v.errs, func(a, b int) bool { return v.errs[a].Line < v.errs[b].Line })
		return notes, v.errs
	}
	return notes, nil
}

// AlertKinds lists the alert kinds a route may filter on.
var AlertKinds = []string{"suspect_point", "fragile_fit", "drift", "blocked", "form_lapse"}

type validator struct {
	c    *Config
	errs Errors
}

// add records an error at key path; idx is the index of the [[model]] or
// [[route]] table the key belongs to, or -1 for top-level keys.
func (v *validator) add(path []string, idx int, sentinel error, format string, args ...any) {
	key := strings.Join(path, ".")
	if idx >= 0 {
		key = fmt.Sprintf("%s[%d].%s", path[0], idx+1, strings.Join(path[1:], "."))
	}
	line := 0
	if v.c.lines != nil {
		line = v.c.lines.findIndexed(path, idx)
	}
	v.errs = append(v.errs, &Error{File: v.c.Path, Line: line, Key: key, Err: fmt.Errorf("%w: %s", sentinel, fmt.Sprintf(format, args...))})
}

func oneOf(s string, set ...string) bool {
	for _, x := range set {
		if s == x {
			return true
		}
	}
	return false
}

// checkPublicName returns why n is not a host name or IP address that a
// Host header can carry ("" when it is one).
// checkPublicURL says what is wrong with a public_url ("" when nothing).
func checkPublicURL(s string) string {
	u, err := url.Parse(s)
	switch {
	case err != nil:
		return "not a URL: " + err.Error()
	case u.Scheme != "http" && u.Scheme != "https":
		return "want an http:// or https:// address"
	case u.Host == "" || u.Hostname() == "":
		return "the address names no host"
	case u.RawQuery != "" || u.Fragment != "" || u.User != nil:
		return "no query, fragment or user name: the address of the dashboard only"
	}
	return ""
}

// PublicHosts are the host names the HTTP server answers to besides its
// listen address and localhost: PublicNames and the host of PublicURL.
func (c *Config) PublicHosts() []string {
	hosts := append([]string(nil), c.PublicNames...)
	if u, err := url.Parse(c.PublicURL); err == nil && c.PublicURL != "" && u.Hostname() != "" {
		hosts = append(hosts, u.Hostname())
	}
	return hosts
}

func checkPublicName(n string) string {
	switch {
	case n == "":
		return "empty"
	case strings.Contains(n, "://"):
		return "a host name only, without the scheme"
	case strings.ContainsAny(n, "/?#"):
		return "a host name only, without a path"
	case strings.Contains(n, "*"):
		return "wildcards are not supported; list each name"
	}
	h := strings.TrimSuffix(n, ".")
	if ip := strings.TrimSuffix(strings.TrimPrefix(h, "["), "]"); strings.Contains(ip, ":") {
		if net.ParseIP(ip) == nil {
			return "a host name only, without a port"
		}
		return ""
	}
	if len(h) > 253 {
		return "longer than 253 characters"
	}
	for _, label := range strings.Split(h, ".") {
		if label == "" || len(label) > 63 {
			return "every dot-separated part must have 1 to 63 characters"
		}
		for _, r := range label {
			if !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '-' || r == '_') {
				return fmt.Sprintf("character %q is not allowed in a host name", r)
			}
		}
		if label[0] == '-' || label[len(label)-1] == '-' {
			return "a part of the name starts or ends with '-'"
		}
	}
	return ""
}
