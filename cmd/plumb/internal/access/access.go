// Package access decides who is acting on plumb's HTTP API and what they
// may do.
//
// # Roles
//
// Three roles, each allowed what the one before it is, and more:
//
//	viewer    sees the dashboard, the API's reads and the reports
//	operator  also acknowledges and resolves alerts and sets or ends
//	          quiet periods
//	reviewer  also sets a reading aside (excludes it), reinstates it and
//	          records a re-baseline
//
// Role.May answers for one Action. Only a reviewer may exclude,
// reinstate or re-baseline: those are decisions about measurements and
// stay with qualified staff under local quality procedures.
//
// # Identifying the caller
//
// A Gate identifies the caller of a request, in this order:
//
//  1. "Authorization: Bearer TOKEN": the SHA-256 of TOKEN is compared,
//     in constant time, with each configured account's stored hash; the
//     account gives the name and the role. The old single shared token,
//     when configured, still works: it acts as an operator named
//     "shared token" (it acknowledges and resolves as before, and cannot
//     decide about readings). A bearer that matches nothing is refused
//     (ErrBadToken), never downgraded. With no token and no account
//     configured the header is ignored, as it always was.
//  2. A trusted-proxy header (for sites that put single sign-on in front):
//     only from a peer whose address is in the configured prefixes, the
//     header names the user; a listed account of that name gives the role,
//     otherwise the proxy's default role (none: refused). From any other
//     peer the header is ignored.
//  3. Otherwise the caller is anonymous: a viewer. When no token and no
//     account at all is configured, a request from a loopback address to
//     a loopback host name acts as an operator named "local", as plumb
//     always allowed.
//
// Why SHA-256 and not a password hash: tokens are generated (NewToken: 32
// random bytes, 256 bits), not chosen by people. A slow hash (bcrypt,
// scrypt, Argon2) exists to make guessing a low-entropy password
// expensive; nobody can guess among 2^256 tokens, fast hash or not, so a
// stored SHA-256 is as safe as a slow hash for them while checking a
// request costs a microsecond instead of tens of milliseconds. Do not
// store hashes of short, hand-chosen tokens.
//
// A Gate is safe for use by multiple goroutines.
package access

import (
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"encoding/hex"
	"errors"
	"fmt"
	"net"
	"net/http"
	"net/netip"
	"strings"
)

// Role is what a user may do.
type Role int

// The roles, each allowed all that the previous one is.
const (
	NoRole Role = iota
	Viewer
	Operator
	Reviewer
)

var roleNames = [...]string{NoRole: "none", Viewer: "viewer", Operator: "operator", Reviewer: "reviewer"}

// String returns the role's name as written in the config.
func (r Role) String() string {
	if r < 0 || int(r) >= len(roleNames) {
		return fmt.Sprintf("role(%d)", int(r))
	}
	return roleNames[r]
}

// ErrUnknownRole is returned (wrapped) by ParseRole.
var ErrUnknownRole = errors.New("unknown role")

// ParseRole parses "viewer", "operator" or "reviewer" ("none" too, for a
// proxy that admits no unlisted user).
func ParseRole(s string) (Role, error) {
	for r, n := range roleNames {
		if s == n {
			return Role(r), nil
		}
	}
	return NoRole, fmt.Errorf("%w %q: want viewer, operator or reviewer", ErrUnknownRole, s)
}

// Action is something a caller asks to do.
type Action string

// The actions.
const (
	View        Action = "view"
	Acknowledge Action = "acknowledge"
	Resolve     Action = "resolve"
	Quiet       Action = "quiet"
	Exclude     Action = "exclude"
	Reinstate   Action = "reinstate"
	Rebaseline  Action = "rebaseline"
)

// least is the least role allowed each action.
var least = map[Action]Role{
	View:        Viewer,
	Acknowledge: Operator,
	Resolve:     Operator,
	Quiet:       Operator,
	Exclude:     Reviewer,
	Reinstate:   Reviewer,
	Rebaseline:  Reviewer,
}

// May reports whether the role allows the action. An unknown action is
// allowed to no one.
func (r Role) May(a Action) bool {
	need, ok := least[a]
	return ok && r >= need
}

// User is the identified caller of a request.
type User struct {
	Name string // "" for an anonymous viewer
	Role Role
	// Via says how the user was identified: "token", "shared token",
	// "proxy", "local" or "anonymous".
	Via string
}

// Account is a configured user.
type Account struct {
	Name string
	Role Role
	// TokenHash is the SHA-256 of the user's bearer token (HashToken);
	// nil for a user known only through the proxy header.
	TokenHash []byte
}

// Proxy is a trusted reverse proxy that names the user in a header.
type Proxy struct {
	// Header carries the user's name, e.g. "X-Remote-User".
	Header string
	// From are the addresses the header is trusted from.
	From []netip.Prefix
	// Role is given to names not listed as accounts (NoRole: refuse them).
	Role Role
}

// Config configures a Gate.
type Config struct {
	Accounts []Account
	// SharedToken is the old single bearer token ("" for none).
	SharedToken string
	// Proxy, when not nil, is trusted for its header.
	Proxy *Proxy
}

// Errors of Identify and Allow. ErrNoCredentials and ErrBadToken map to
// 401, ErrForbidden to 403.
var (
	ErrBadToken      = errors.New("the bearer token matches no user")
	ErrNoCredentials = errors.New("this needs a named user: send a bearer token")
	ErrForbidden     = errors.New("not allowed")
)

// Gate identifies callers and checks their role.
type Gate struct {
	accounts []Account
	shared   [32]byte
	hasShare bool
	byName   map[string]Account
	proxy    *Proxy
}

// New checks c and returns its Gate: account names must be unique and
// non-empty, hashes 32 bytes and unique, roles known.
func New(c Config) (*Gate, error) {
	g := &Gate{byName: make(map[string]Account), proxy: c.Proxy}
	seen := make(map[string]bool)
	for _, a := range c.Accounts {
		switch {
		case strings.TrimSpace(a.Name) == "":
			return nil, errors.New("access: an account needs a name")
		case g.byName[a.Name].Name != "":
			return nil, fmt.Errorf("access: account %q is defined twice", a.Name)
		case a.Role < Viewer || a.Role > Reviewer:
			return nil, fmt.Errorf("access: account %q: role %v", a.Name, a.Role)
		case a.TokenHash != nil && len(a.TokenHash) != sha256.Size:
			return nil, fmt.Errorf("access: account %q: a token hash is %d bytes, got %d", a.Name, sha256.Size, len(a.TokenHash))
		case a.TokenHash != nil && seen[string(a.TokenHash)]:
			return nil, fmt.Errorf("access: account %q: two accounts share a token", a.Name)
		}
		if a.TokenHash != nil {
			seen[string(a.TokenHash)] = true
		}
		g.byName[a.Name] = a
		g.accounts = append(g.accounts, a)
	}
	if c.SharedToken != "" {
		g.shared, g.hasShare = sha256.Sum256([]byte(c.SharedToken)), true
	}
	if p := c.Proxy; p != nil && (p.Header == "" || len(p.From) == 0) {
		return nil, errors.New("access: a trusted proxy needs a header and the addresses it is trusted from")
	}
	return g, nil
}

// HashToken returns the SHA-256 of a bearer token, as accounts store it.
func HashToken(token string) []byte {
	h := sha256.Sum256([]byte(token))
	return h[:]
}

// NewToken returns a new random bearer token (32 bytes from crypto/rand,
// base64url) and the hex SHA-256 to put in the config.
func NewToken() (token, hashHex string, err error) {
	var b [32]byte
	if _, err := rand.Read(b[:]); err != nil {
		return "", "", fmt.Errorf("access: new token: %w", err)
	}
	token = base64.RawURLEncoding.EncodeToString(b[:])
	return token, hex.EncodeToString(HashToken(token)), nil
}

// open reports whether nothing is configured: the old loopback rule.
func (g *Gate) open() bool { return len(g.accounts) == 0 && !g.hasShare }

// Identify returns the caller of r (see the package doc). Its errors wrap
// ErrBadToken or ErrForbidden (an unlisted name from the proxy when the
// proxy's role is none).
func (g *Gate) Identify(r *http.Request) (User, error) {
	// With nothing configured a bearer means nothing, as before named
	// users existed: the loopback rule below decides.
	if auth := r.Header.Get("Authorization"); auth != "" && !g.open() {
		tok, ok := strings.CutPrefix(auth, "Bearer ")
		if !ok {
			return User{}, fmt.Errorf("%w (want \"Authorization: Bearer TOKEN\")", ErrBadToken)
		}
		h := sha256.Sum256([]byte(strings.TrimSpace(tok)))
		var found *Account
		for i := range g.accounts {
			// Compare with every account, so the time does not tell
			// which one matched.
			if g.accounts[i].TokenHash != nil && subtle.ConstantTimeCompare(h[:], g.accounts[i].TokenHash) == 1 {
				found = &g.accounts[i]
			}
		}
		if found != nil {
			return User{Name: found.Name, Role: found.Role, Via: "token"}, nil
		}
		if g.hasShare && subtle.ConstantTimeCompare(h[:], g.shared[:]) == 1 {
			return User{Name: "shared token", Role: Operator, Via: "shared token"}, nil
		}
		return User{}, ErrBadToken
	}
	if p := g.proxy; p != nil && trusted(p.From, r.RemoteAddr) {
		if name := strings.TrimSpace(r.Header.Get(p.Header)); name != "" {
			if a, ok := g.byName[name]; ok {
				return User{Name: name, Role: a.Role, Via: "proxy"}, nil
			}
			if p.Role == NoRole {
				return User{}, fmt.Errorf("%w: %q is not a configured user", ErrForbidden, name)
			}
			return User{Name: name, Role: p.Role, Via: "proxy"}, nil
		}
	}
	if g.open() && Loopback(r.RemoteAddr) && LoopbackHost(r.Host) {
		return User{Name: "local", Role: Operator, Via: "local"}, nil
	}
	return User{Role: Viewer, Via: "anonymous"}, nil
}

// Allow identifies the caller of r and checks that its role allows a.
// An anonymous caller refused is ErrNoCredentials (401: it may still
// authenticate); a named one ErrForbidden (403).
func (g *Gate) Allow(r *http.Request, a Action) (User, error) {
	u, err := g.Identify(r)
	if err != nil {
		return u, err
	}
	if !u.Role.May(a) {
		if u.Name == "" {
			return u, fmt.Errorf("%w (to %s)", ErrNoCredentials, a)
		}
		return u, fmt.Errorf("%w: %s is a %s and may not %s", ErrForbidden, u.Name, u.Role, a)
	}
	return u, nil
}

// Status maps an error of Identify or Allow to an HTTP status.
func Status(err error) int {
	switch {
	case err == nil:
		return http.StatusOK
	case errors.Is(err, ErrBadToken), errors.Is(err, ErrNoCredentials):
		return http.StatusUnauthorized
	default:
		return http.StatusForbidden
	}
}

// trusted reports whether the peer address remote is in one of the
// prefixes.
func trusted(from []netip.Prefix, remote string) bool {
	ap, err := netip.ParseAddrPort(remote)
	var ip netip.Addr
	if err == nil {
		ip = ap.Addr()
	} else if ip, err = netip.ParseAddr(remote); err != nil {
		return false
	}
	ip = ip.Unmap()
	for _, p := range from {
		if p.Contains(ip) {
			return true
		}
	}
	return false
}

// ParsePrefix parses an address ("10.0.0.5", "::1") as a one-address
// prefix, or a CIDR prefix ("10.0.0.0/24").
func ParsePrefix(s string) (netip.Prefix, error) {
	if strings.Contains(s, "/") {
		p, err := netip.ParsePrefix(s)
		if err != nil {
			return p, err
		}
		return p.Masked(), nil
	}
	a, err := netip.ParseAddr(s)
	if err != nil {
		return netip.Prefix{}, err
	}
	a = a.Unmap()
	return netip.PrefixFrom(a, a.BitLen()), nil
}

// Loopback reports whether the peer address is a loopback address.
func Loopback(remote string) bool {
	host, _, err := net.SplitHostPort(remote)
	if err != nil {
		host = remote
	}
	ip := net.ParseIP(strings.Trim(host, "[]"))
	return ip != nil && ip.IsLoopback()
}

// LoopbackHost reports whether the request's Host names this machine, so
// that a page served under another name resolving to 127.0.0.1 (DNS
// rebinding) cannot act without credentials.
func LoopbackHost(host string) bool {
	h, _, err := net.SplitHostPort(host)
	if err != nil {
		h = host
	}
	h = strings.Trim(h, "[]")
	if strings.EqualFold(h, "localhost") || strings.HasSuffix(strings.ToLower(h), ".localhost") {
		return true
	}
	ip := net.ParseIP(h)
	return ip != nil && ip.IsLoopback()
}

// Open reports whether nothing is configured (no account, no shared
// token): only the loopback rule admits actions then.
func (g *Gate) Open() bool { return g.open() }
