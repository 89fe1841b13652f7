package config

import (
	"encoding/hex"
	"errors"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/access"
)

// hashOf is the hex SHA-256 of a token, as token_sha256 holds it.
func hashOf(tok string) string { return hex.EncodeToString(access.HashToken(tok)) }

func TestAccessKeys(t *testing.T) {
	rv, op := hashOf("reviewer-token-0123456789abcdef"), hashOf("operator-token-0123456789abcdef")
	src := `state = "plumb.db"
token_env = "PLUMB_TOKEN"
quiet_max = "8h"

[[user]]
name = "r.okafor"
role = "reviewer"
token_sha256 = "` + strings.ToUpper(rv) + `"

[[user]]
name = "l.hart"
role = "operator"
token_sha256 = "` + op + `"

[[user]]
name = "m.silva"
role = "reviewer"

[proxy]
header = "X-Remote-User"
trusted = ["10.1.2.3", "10.1.2.0/24"]
`
	c, err := Parse(strings.NewReader(src), "p.toml")
	if err != nil {
		t.Fatal(err)
	}
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	if c.QuietMax.Duration != 8*time.Hour || c.Proxy.Role != "viewer" {
		t.Errorf("quiet_max %v, proxy role %q", c.QuietMax, c.Proxy.Role)
	}
	g, err := access.New(c.AccessConfig(func(k string) string {
		if k == "PLUMB_TOKEN" {
			return "old-shared"
		}
		return ""
	}))
	if err != nil {
		t.Fatal(err)
	}
	for _, tt := range []struct {
		token, remote, user string
		want                access.User
	}{
		{"reviewer-token-0123456789abcdef", "192.0.2.1:1", "", access.User{Name: "r.okafor", Role: access.Reviewer, Via: "token"}},
		{"operator-token-0123456789abcdef", "192.0.2.1:1", "", access.User{Name: "l.hart", Role: access.Operator, Via: "token"}},
		{"old-shared", "192.0.2.1:1", "", access.User{Name: "shared token", Role: access.Operator, Via: "shared token"}},
		{"", "10.1.2.77:1", "m.silva", access.User{Name: "m.silva", Role: access.Reviewer, Via: "proxy"}},
	} {
		r := httptest.NewRequest(http.MethodPost, "/", nil)
		r.RemoteAddr = tt.remote
		if tt.token != "" {
			r.Header.Set("Authorization", "Bearer "+tt.token)
		}
		if tt.user != "" {
			r.Header.Set("X-Remote-User", tt.user)
		}
		if got, err := g.Identify(r); err != nil || got != tt.want {
			t.Errorf("Identify(%q, %q) = %+v, %v; want %+v", tt.token, tt.user, got, err, tt.want)
		}
	}

	// Without the new keys: the defaults, and the shared token as before.
	c, err = Parse(strings.NewReader("state = \"plumb.db\"\n"), "p.toml")
	if err != nil {
		t.Fatal(err)
	}
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	if c.QuietMax.Duration != DefaultQuietMax || c.Proxy != nil || len(c.Users) != 0 {
		t.Errorf("defaults: %+v", c)
	}
}

func TestAccessErrors(t *testing.T) {
	h := hashOf("a-token-0123456789abcdef")
	tests := []struct {
		name     string
		src      string
		sentinel error
		line     int
		key      string
	}{
		{"user without name", "[[user]]\nrole = \"viewer\"\ntoken_sha256 = \"" + h + "\"\n", ErrMissing, 1, "user[1].name"},
		{"unknown role", "[[user]]\nname = \"a\"\nrole = \"admin\"\ntoken_sha256 = \"" + h + "\"\n", ErrBadValue, 3, "user[1].role"},
		{"role none", "[[user]]\nname = \"a\"\nrole = \"none\"\ntoken_sha256 = \"" + h + "\"\n", ErrBadValue, 3, "user[1].role"},
		{"no token, no proxy", "[[user]]\nname = \"a\"\nrole = \"viewer\"\n", ErrMissing, 1, "user[1].token_sha256"},
		{"token in clear", "[[user]]\nname = \"a\"\nrole = \"viewer\"\ntoken_sha256 = \"hunter2\"\n", ErrBadValue, 4, "user[1].token_sha256"},
		{"same token twice", "[[user]]\nname = \"a\"\nrole = \"viewer\"\ntoken_sha256 = \"" + h + "\"\n[[user]]\nname = \"b\"\nrole = \"viewer\"\ntoken_sha256 = \"" + h + "\"\n",
			ErrBadValue, 8, "user[2].token_sha256"},
		{"user twice", "[[user]]\nname = \"a\"\nrole = \"viewer\"\ntoken_sha256 = \"" + h + "\"\n[[user]]\nname = \"a\"\nrole = \"viewer\"\ntoken_sha256 = \"" + hashOf("other-token-0123456789") + "\"\n",
			ErrBadValue, 6, "user[2].name"},
		{"proxy without addresses", "[proxy]\nheader = \"X-User\"\n", ErrMissing, 1, "proxy.trusted"},
		{"proxy bad address", "[proxy]\nheader = \"X-User\"\ntrusted = [\"proxy.lab\"]\n", ErrBadValue, 3, "proxy.trusted"},
		{"proxy bad role", "[proxy]\nheader = \"X-User\"\ntrusted = [\"10.0.0.1\"]\nrole = \"root\"\n", ErrBadValue, 4, "proxy.role"},
		{"proxy without header", "[proxy]\ntrusted = [\"10.0.0.1\"]\n", ErrMissing, 1, "proxy.header"},
		{"negative quiet_max", "quiet_max = \"-1h\"\n", ErrBadValue, 1, "quiet_max"},
		{"unknown user key", "[[user]]\nname = \"a\"\ntoken = \"x\"\n", ErrUnknownKey, 3, "user.token"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c, err := Parse(strings.NewReader("state = \"s.db\"\n"+tt.src), "p.toml")
			if err == nil {
				err = c.Validate()
			}
			if !errors.Is(err, tt.sentinel) {
				t.Fatalf("err = %v, want %v", err, tt.sentinel)
			}
			var ce *Error
			if !errors.As(err, &ce) {
				t.Fatalf("err %T is not *Error", err)
			}
			if ce.Line != tt.line+1 {
				t.Errorf("line = %d, want %d (%v)", ce.Line, tt.line+1, err)
			}
			if ce.Key != tt.key {
				t.Errorf("key = %q, want %q", ce.Key, tt.key)
			}
		})
	}
}
