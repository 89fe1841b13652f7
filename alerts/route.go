package alerts

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"net/http"
	"os"
	"time"
)

// Sender sends one delivery's event somewhere. An error that retrying
// cannot fix is wrapped with Permanent; the Dispatcher dead-letters it at
// once. Send must honour ctx.
type Sender interface {
	Send(ctx context.Context, d Delivery) error
}

// PermanentError marks a failure that retrying cannot fix (a missing
// program, a receiver that rejects the request).
type PermanentError struct{ Err error }

func (e *PermanentError) Error() string { return e.Err.Error() }
func (e *PermanentError) Unwrap() error { return e.Err }

// Permanent wraps err as a PermanentError (nil stays nil).
func Permanent(err error) error {
	if err == nil {
		return nil
	}
	return &PermanentError{Err: err}
}

// RetryAfterError asks the Dispatcher to wait at least After before the
// next attempt (a receiver's Retry-After).
type RetryAfterError struct {
	Err   error
	After time.Duration
}

func (e *RetryAfterError) Error() string { return e.Err.Error() }
func (e *RetryAfterError) Unwrap() error { return e.Err }

// RouteOptions are what routes need from the daemon. Zero fields take
// defaults.
type RouteOptions struct {
	// Logger is where the log route writes; nil means slog.Default().
	Logger *slog.Logger
	// Client sends webhooks; nil means a client without its own timeout
	// (each attempt is bounded by the route's Timeout).
	Client *http.Client
	// Getenv reads secret_env; nil means os.Getenv.
	Getenv func(string) string
	// Now stamps webhook signatures; nil means time.Now.
	Now func() time.Time
}

// Route is a configured route, ready to send. A Route is safe for use by
// multiple goroutines.
type Route struct {
	cfg    RouteConfig
	sender Sender
}

// NewRoute validates c, fills its defaults, reads its secret and builds the
// sender.
func NewRoute(c RouteConfig, o RouteOptions) (*Route, error) {
	return newRoute(c, o, nil)
}

// newRoute builds a route; a command route's program does not inherit the
// environment variables named in hide (other routes' secrets).
func newRoute(c RouteConfig, o RouteOptions, hide []string) (*Route, error) {
	if err := c.Validate(); err != nil {
		return nil, err
	}
	c = c.WithDefaults()
	if o.Logger == nil {
		o.Logger = slog.Default()
	}
	if o.Client == nil {
		o.Client = &http.Client{}
	}
	if o.Getenv == nil {
		o.Getenv = os.Getenv
	}
	if o.Now == nil {
		o.Now = time.Now
	}
	r := &Route{cfg: c}
	switch c.Kind {
	case RouteLog:
		r.sender = &logSender{name: c.Name, log: o.Logger}
	case RouteFile:
		r.sender = &fileSender{path: c.Path}
	case RouteWebhook:
		s, err := LoadSecret(c, o.Getenv)
		if err != nil {
			return nil, err
		}
		r.sender = &webhookSender{url: c.URL, secret: s, client: o.Client, now: o.Now}
	case RouteCommand:
		r.sender = &commandSender{name: c.Name, argv: append([]string(nil), c.Argv...), hide: hide}
	}
	return r, nil
}

// NewRoutes builds every route; names must be unique. Command routes'
// programs do not inherit the environment variables that hold webhook
// secrets (secret_env of any route).
func NewRoutes(cs []RouteConfig, o RouteOptions) ([]*Route, error) {
	if err := ValidateRoutes(cs); err != nil {
		return nil, err
	}
	var hide []string
	for _, c := range cs {
		if c.SecretEnv != "" {
			hide = append(hide, c.SecretEnv)
		}
	}
	rs := make([]*Route, 0, len(cs))
	for _, c := range cs {
		r, err := newRoute(c, o, hide)
		if err != nil {
			return nil, err
		}
		rs = append(rs, r)
	}
	return rs, nil
}

// NewRouteWith returns a route with a sender of the caller's (for tests and
// for routes plumb does not ship). c is validated only for its name and
// numbers; its defaults are filled.
func NewRouteWith(c RouteConfig, s Sender) (*Route, error) {
	if c.Name == "" {
		return nil, cfgErr("route", "name", ErrMissing, "every route needs a name")
	}
	if s == nil {
		return nil, errors.New("alerts: NewRouteWith: nil Sender")
	}
	return &Route{cfg: c.WithDefaults(), sender: s}, nil
}

// Name is the route's name.
func (r *Route) Name() string { return r.cfg.Name }

// Config is the route's configuration with defaults filled.
func (r *Route) Config() RouteConfig { return r.cfg }

// Send sends one delivery, bounded by the route's Timeout.
func (r *Route) Send(ctx context.Context, d Delivery) error {
	ctx, cancel := context.WithTimeout(ctx, r.cfg.Timeout)
	defer cancel()
	if err := r.sender.Send(ctx, d); err != nil {
		return fmt.Errorf("route %q: %w", r.cfg.Name, err)
	}
	return nil
}

// String describes the route without secrets.
func (r *Route) String() string {
	return fmt.Sprintf("route %q (%s)", r.cfg.Name, r.cfg.Kind)
}
