package config

import (
	"encoding/hex"
	"strings"
	"time"

	"plumb/cmd/plumb/internal/access"
)

// User is one [[user]] table: a named user of the HTTP API.
//
//	[[user]]
//	name = "r.okafor"
//	role = "reviewer"            # viewer, operator or reviewer
//	token_sha256 = "9c1e...64 hex digits"
//
// token_sha256 is the hex SHA-256 of the user's bearer token ("plumb user
// token" makes a token and prints its hash); the token itself is never
// written in the file. A user without a token is known only through the
// trusted proxy, which names them.
type User struct {
	Name        string `toml:"name"`
	Role        string `toml:"role"`
	TokenSHA256 string `toml:"token_sha256"`
}

// Proxy is the [proxy] table: a reverse proxy doing single sign-on that
// names the user in a header.
//
//	[proxy]
//	header = "X-Remote-User"
//	trusted = ["10.1.2.3", "10.1.2.0/24"]   # addresses the header is believed from
//	role = "viewer"                        # for names not listed as [[user]]; "none" refuses them
type Proxy struct {
	Header  string   `toml:"header"`
	Trusted []string `toml:"trusted"`
	Role    string   `toml:"role"`
}

// DefaultQuietMax is the longest quiet period when quiet_max is not set.
const DefaultQuietMax = 24 * time.Hour

func (c *Config) applyAccessDefaults() {
	if c.QuietMax.Duration == 0 {
		c.QuietMax.Duration = DefaultQuietMax
	}
	if c.Proxy != nil && c.Proxy.Role == "" {
		c.Proxy.Role = "viewer"
	}
}

func (c *Config) validateAccess(v *validator) {
	if c.QuietMax.Duration < 0 {
		v.add([]string{"quiet_max"}, -1, ErrBadValue, "must be positive")
	}
	names := map[string]bool{}
	hashes := map[string]string{}
	for i, u := range c.Users {
		at := func(k string) []string { return []string{"user", k} }
		switch {
		case strings.TrimSpace(u.Name) == "":
			v.add(at("name"), i, ErrMissing, "every user needs a name")
		case names[u.Name]:
			v.add(at("name"), i, ErrBadValue, "user %q is defined twice", u.Name)
		case strings.TrimSpace(u.Name) != u.Name:
			v.add(at("name"), i, ErrBadValue, "a user name may not have surrounding spaces: %q", u.Name)
		}
		names[u.Name] = true
		if r, err := access.ParseRole(u.Role); err != nil || r == access.NoRole {
			v.add(at("role"), i, ErrBadValue, "want viewer, operator or reviewer, got %q", u.Role)
		}
		switch h := strings.ToLower(u.TokenSHA256); {
		case h == "" && c.Proxy == nil:
			v.add(at("token_sha256"), i, ErrMissing, "a user needs token_sha256 (the hex SHA-256 of the token; \"plumb user token\" makes one) unless a [proxy] names users")
		case h == "":
		case len(h) != 64 || !isHex(h):
			v.add(at("token_sha256"), i, ErrBadValue, "want 64 hex digits (a SHA-256), got %d characters", len(u.TokenSHA256))
		case hashes[h] != "":
			v.add(at("token_sha256"), i, ErrBadValue, "user %q has the same token as %q", u.Name, hashes[h])
		default:
			hashes[h] = u.Name
		}
	}
	if p := c.Proxy; p != nil {
		if strings.TrimSpace(p.Header) == "" {
			v.add([]string{"proxy", "header"}, -1, ErrMissing, "the header that names the user is required")
		}
		if len(p.Trusted) == 0 {
			v.add([]string{"proxy", "trusted"}, -1, ErrMissing, "list the proxy's addresses: the header is believed only from them")
		}
		for _, a := range p.Trusted {
			if _, err := access.ParsePrefix(a); err != nil {
				v.add([]string{"proxy", "trusted"}, -1, ErrBadValue, "want an address or a prefix (10.1.2.3, 10.1.2.0/24), got %q", a)
			}
		}
		if _, err := access.ParseRole(p.Role); err != nil {
			v.add([]string{"proxy", "role"}, -1, ErrBadValue, "want none, viewer, operator or reviewer, got %q", p.Role)
		}
	}
}

func isHex(s string) bool {
	_, err := hex.DecodeString(s)
	return err == nil
}

// AccessConfig returns the access.Config of a validated configuration:
// the users, the shared token read from the environment variable token_env
// (by getenv; unset or empty: none), and the proxy.
func (c *Config) AccessConfig(getenv func(string) string) access.Config {
	var ac access.Config
	for _, u := range c.Users {
		r, _ := access.ParseRole(u.Role)
		a := access.Account{Name: u.Name, Role: r}
		if u.TokenSHA256 != "" {
			a.TokenHash, _ = hex.DecodeString(strings.ToLower(u.TokenSHA256))
		}
		ac.Accounts = append(ac.Accounts, a)
	}
	if c.TokenEnv != "" && getenv != nil {
		ac.SharedToken = getenv(c.TokenEnv) // as the daemon always read it
	}
	if p := c.Proxy; p != nil {
		r, _ := access.ParseRole(p.Role)
		ap := &access.Proxy{Header: p.Header, Role: r}
		for _, a := range p.Trusted {
			if pf, err := access.ParsePrefix(a); err == nil {
				ap.From = append(ap.From, pf)
			}
		}
		ac.Proxy = ap
	}
	return ac
}
