package alerts

import (
	"fmt"
	"net/url"
	"regexp"
	"time"
)

// Route kinds.
const (
	RouteLog     = "log"
	RouteFile    = "file"
	RouteWebhook = "webhook"
	RouteCommand = "command"
)

// Route defaults, applied by WithDefaults to zero fields.
const (
	DefaultTimeout     = 10 * time.Second
	DefaultMaxAttempts = 8
	DefaultBackoff     = 2 * time.Second
	DefaultMaxBackoff  = 10 * time.Minute
)

// RouteConfig configures one named route. The cmd layer decodes it from
// TOML; the keys are the toml tags. A route takes every model's alerts
// unless a model names its own routes (Config.ModelRoutes); Models, Kinds
// and MinSeverity then filter what the route takes.
//
// The smallest working webhook:
//
//	[[route]]
//	name = "oncall"
//	kind = "webhook"
//	url = "http://127.0.0.1:9911/hook"
//	secret_env = "PLUMB_HOOK_SECRET"
//
// A RouteConfig holds where a secret comes from, never the secret itself,
// so it is safe to print or log.
type RouteConfig struct {
	Name string `toml:"name" json:"name"`
	// Kind is "log", "file", "webhook" or "command".
	Kind string `toml:"kind" json:"kind"`
	// URL is the webhook's http or https URL.
	URL string `toml:"url" json:"url,omitempty"`
	// SecretEnv names an environment variable, SecretFile a file, holding
	// the webhook signing secret (at most one of them; surrounding
	// whitespace is trimmed). Without either, events are sent unsigned.
	SecretEnv  string `toml:"secret_env" json:"secret_env,omitempty"`
	SecretFile string `toml:"secret_file" json:"secret_file,omitempty"`
	// Path is the file route's JSON-lines file.
	Path string `toml:"path" json:"path,omitempty"`
	// Argv is the command route's program and arguments (no shell).
	Argv []string `toml:"argv" json:"argv,omitempty"`
	// Timeout bounds one attempt (webhook request, command run).
	Timeout time.Duration `toml:"timeout" json:"timeout,omitempty"`
	// MaxAttempts bounds the attempts per event before it is dead-lettered.
	MaxAttempts int `toml:"max_attempts" json:"max_attempts,omitempty"`
	// Backoff is the wait after the first failed attempt; it doubles after
	// each further failure up to MaxBackoff, with jitter (half to all of it).
	Backoff    time.Duration `toml:"backoff" json:"backoff,omitempty"`
	MaxBackoff time.Duration `toml:"max_backoff" json:"max_backoff,omitempty"`
	// RateLimit is the most events per minute the route sends (a token
	// bucket of that size, refilled evenly); 0 means no limit. Events held
	// back stay pending in the outbox.
	RateLimit int `toml:"rate_limit" json:"rate_limit,omitempty"`
	// Models, Kinds: when not empty, only these models / kinds.
	Models []string `toml:"models" json:"models,omitempty"`
	Kinds  []string `toml:"kinds" json:"kinds,omitempty"`
	// MinSeverity: only alerts at least this severe ("" takes all).
	MinSeverity string `toml:"min_severity" json:"min_severity,omitempty"`
}

// WithDefaults returns c with zero Timeout, MaxAttempts, Backoff and
// MaxBackoff set to their defaults.
func (c RouteConfig) WithDefaults() RouteConfig {
	if c.Timeout == 0 {
		c.Timeout = DefaultTimeout
	}
	if c.MaxAttempts == 0 {
		c.MaxAttempts = DefaultMaxAttempts
	}
	if c.Backoff == 0 {
		c.Backoff = DefaultBackoff
	}
	if c.MaxBackoff == 0 {
		c.MaxBackoff = DefaultMaxBackoff
	}
	return c
}

var routeName = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$`)

// Validate checks the route; the error is a *ConfigError naming the route
// and the field. Zero durations and attempts are valid (they take the
// defaults).
func (c RouteConfig) Validate() error {
	sec := fmt.Sprintf("route %q", c.Name)
	if c.Name == "" {
		return cfgErr("route", "name", ErrMissing, "every route needs a name")
	}
	if !routeName.MatchString(c.Name) {
		return cfgErr(sec, "name", ErrInvalid, "use letters, digits, '_', '.', '-' (up to 64)")
	}
	switch c.Kind {
	case RouteLog:
	case RouteFile:
		if c.Path == "" {
			return cfgErr(sec, "path", ErrMissing, "a file route needs a path")
		}
	case RouteWebhook:
		if c.URL == "" {
			return cfgErr(sec, "url", ErrMissing, "a webhook route needs a url")
		}
		u, err := url.Parse(c.URL)
		if err != nil {
			return cfgErr(sec, "url", ErrInvalid, "%v", err)
		}
		if (u.Scheme != "http" && u.Scheme != "https") || u.Host == "" {
			return cfgErr(sec, "url", ErrInvalid, "%q (want an absolute http or https URL)", c.URL)
		}
		if c.SecretEnv != "" && c.SecretFile != "" {
			return cfgErr(sec, "secret_file", ErrConflict, "set secret_env or secret_file, not both")
		}
	case RouteCommand:
		if len(c.Argv) == 0 || c.Argv[0] == "" {
			return cfgErr(sec, "argv", ErrMissing, "a command route needs a program")
		}
	case "":
		return cfgErr(sec, "kind", ErrMissing, "want log, file, webhook or command")
	default:
		return cfgErr(sec, "kind", ErrInvalid, "%q (want log, file, webhook or command)", c.Kind)
	}
	if c.Kind != RouteWebhook {
		switch {
		case c.URL != "":
			return cfgErr(sec, "url", ErrConflict, "only a webhook route takes a url")
		case c.SecretEnv != "":
			return cfgErr(sec, "secret_env", ErrConflict, "only a webhook route is signed")
		case c.SecretFile != "":
			return cfgErr(sec, "secret_file", ErrConflict, "only a webhook route is signed")
		}
	}
	if c.Kind != RouteFile && c.Path != "" {
		return cfgErr(sec, "path", ErrConflict, "only a file route takes a path")
	}
	if c.Kind != RouteCommand && len(c.Argv) > 0 {
		return cfgErr(sec, "argv", ErrConflict, "only a command route takes argv")
	}
	if c.Timeout < 0 {
		return cfgErr(sec, "timeout", ErrInvalid, "%v is negative", c.Timeout)
	}
	if c.MaxAttempts < 0 {
		return cfgErr(sec, "max_attempts", ErrInvalid, "%d is negative", c.MaxAttempts)
	}
	if c.Backoff < 0 {
		return cfgErr(sec, "backoff", ErrInvalid, "%v is negative", c.Backoff)
	}
	if c.MaxBackoff < 0 {
		return cfgErr(sec, "max_backoff", ErrInvalid, "%v is negative", c.MaxBackoff)
	}
	if c.Backoff > 0 && c.MaxBackoff > 0 && c.MaxBackoff < c.Backoff {
		return cfgErr(sec, "max_backoff", ErrConflict, "%v is below backoff %v", c.MaxBackoff, c.Backoff)
	}
	if c.RateLimit < 0 {
		return cfgErr(sec, "rate_limit", ErrInvalid, "%d is negative", c.RateLimit)
	}
	for _, k := range c.Kinds {
		if !Kind(k).Valid() {
			return cfgErr(sec, "kinds", ErrInvalid, "%q (want suspect_point, fragile_fit, drift, blocked or form_lapse)", k)
		}
	}
	for _, m := range c.Models {
		if m == "" {
			return cfgErr(sec, "models", ErrInvalid, "empty model name")
		}
	}
	if c.MinSeverity != "" && !Severity(c.MinSeverity).Valid() {
		return cfgErr(sec, "min_severity", ErrInvalid, "%q (want info, warning or critical)", c.MinSeverity)
	}
	return nil
}

// ValidateRoutes validates each route and checks that names are unique.
func ValidateRoutes(routes []RouteConfig) error {
	seen := make(map[string]bool, len(routes))
	for _, r := range routes {
		if err := r.Validate(); err != nil {
			return err
		}
		if seen[r.Name] {
			return cfgErr(fmt.Sprintf("route %q", r.Name), "name", ErrConflict, "two routes have this name")
		}
		seen[r.Name] = true
	}
	return nil
}

// takes reports whether the route's filter lets the alert through.
func (c RouteConfig) takes(model string, kind Kind, sev Severity) bool {
	if len(c.Models) > 0 && !contains(c.Models, model) {
		return false
	}
	if len(c.Kinds) > 0 && !contains(c.Kinds, string(kind)) {
		return false
	}
	if c.MinSeverity != "" && sev.Rank() < Severity(c.MinSeverity).Rank() {
		return false
	}
	return true
}

func contains(list []string, s string) bool {
	for _, x := range list {
		if x == s {
			return true
		}
	}
	return false
}
