package alerts

import (
	"bytes"
	"fmt"
	"log/slog"
	"os"
)

// Secret holds a webhook signing secret. It never prints: String,
// GoString, LogValue, MarshalText and MarshalJSON all give "[redacted]",
// and inside other values fmt shows only a pointer.
type Secret struct {
	p *[]byte
}

const redacted = "[redacted]"

// NewSecret wraps a copy of b.
func NewSecret(b []byte) Secret {
	c := bytes.Clone(b)
	return Secret{p: &c}
}

// IsZero reports whether no secret is set.
func (s Secret) IsZero() bool { return s.p == nil || len(*s.p) == 0 }

func (s Secret) bytes() []byte {
	if s.p == nil {
		return nil
	}
	return *s.p
}

func (s Secret) String() string                { return redacted }
func (s Secret) GoString() string              { return redacted }
func (s Secret) LogValue() slog.Value          { return slog.StringValue(redacted) }
func (s Secret) MarshalText() ([]byte, error)  { return []byte(redacted), nil }
func (s Secret) MarshalJSON() ([]byte, error)  { return []byte(`"` + redacted + `"`), nil }
func (s Secret) Format(f fmt.State, verb rune) { fmt.Fprint(f, redacted) }

// LoadSecret reads the route's secret from the environment variable
// SecretEnv or the file SecretFile (surrounding whitespace trimmed). No
// source gives a zero Secret. A named source that is unset or empty is an
// error naming the variable or file, never its content. getenv nil means
// os.Getenv.
func LoadSecret(c RouteConfig, getenv func(string) string) (Secret, error) {
	sec := fmt.Sprintf("route %q", c.Name)
	switch {
	case c.SecretEnv != "":
		if getenv == nil {
			getenv = os.Getenv
		}
		v := bytes.TrimSpace([]byte(getenv(c.SecretEnv)))
		if len(v) == 0 {
			return Secret{}, cfgErr(sec, "secret_env", ErrMissing, "environment variable %s is unset or empty", c.SecretEnv)
		}
		return NewSecret(v), nil
	case c.SecretFile != "":
		b, err := os.ReadFile(c.SecretFile)
		if err != nil {
			return Secret{}, cfgErr(sec, "secret_file", ErrInvalid, "%v", err)
		}
		v := bytes.TrimSpace(b)
		if len(v) == 0 {
			return Secret{}, cfgErr(sec, "secret_file", ErrMissing, "%s is empty", c.SecretFile)
		}
		return NewSecret(v), nil
	}
	return Secret{}, nil
}
