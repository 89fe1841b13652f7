package access

import (
	"encoding/hex"
	"errors"
	"net/http"
	"net/http/httptest"
	"net/netip"
	"testing"
)

func TestRoleMay(t *testing.T) {
	actions := []Action{View, Acknowledge, Resolve, Quiet, Exclude, Reinstate, Rebaseline, "delete"}
	// want[role] lists, in the order of actions, what the role may do.
	want := map[Role][]bool{
		NoRole:   {false, false, false, false, false, false, false, false},
		Viewer:   {true, false, false, false, false, false, false, false},
		Operator: {true, true, true, true, false, false, false, false},
		Reviewer: {true, true, true, true, true, true, true, false},
	}
	for role, may := range want {
		for i, a := range actions {
			t.Run(role.String()+"/"+string(a), func(t *testing.T) {
				if got := role.May(a); got != may[i] {
					t.Errorf("%s.May(%s) = %v, want %v", role, a, got, may[i])
				}
			})
		}
	}
}

func TestParseRole(t *testing.T) {
	tests := []struct {
		in      string
		want    Role
		wantErr error
	}{
		{"viewer", Viewer, nil},
		{"operator", Operator, nil},
		{"reviewer", Reviewer, nil},
		{"none", NoRole, nil},
		{"Reviewer", NoRole, ErrUnknownRole},
		{"admin", NoRole, ErrUnknownRole},
		{"", NoRole, ErrUnknownRole},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			got, err := ParseRole(tt.in)
			if got != tt.want || !errors.Is(err, tt.wantErr) {
				t.Errorf("ParseRole(%q) = %v, %v; want %v, %v", tt.in, got, err, tt.want, tt.wantErr)
			}
		})
	}
}

func mustPrefix(t *testing.T, s string) netip.Prefix {
	t.Helper()
	p, err := ParsePrefix(s)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func TestIdentify(t *testing.T) {
	const (
		reviewerTok = "rv-9f8e7d6c5b4a39281706f5e4d3c2b1a0"
		operatorTok = "op-0a1b2c3d4e5f60718293a4b5c6d7e8f9"
		sharedTok   = "the-old-shared-token"
	)
	accounts := []Account{
		{Name: "r.okafor", Role: Reviewer, TokenHash: HashToken(reviewerTok)},
		{Name: "l.hart", Role: Operator, TokenHash: HashToken(operatorTok)},
		{Name: "m.silva", Role: Reviewer}, // through the proxy only
	}
	proxy := &Proxy{Header: "X-Remote-User", From: []netip.Prefix{mustPrefix(t, "10.1.2.0/24"), mustPrefix(t, "::1")}, Role: Viewer}
	full, err := New(Config{Accounts: accounts, SharedToken: sharedTok, Proxy: proxy})
	if err != nil {
		t.Fatal(err)
	}
	strict, err := New(Config{Accounts: accounts, Proxy: &Proxy{Header: "X-Remote-User", From: proxy.From, Role: NoRole}})
	if err != nil {
		t.Fatal(err)
	}
	open, err := New(Config{})
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name    string
		gate    *Gate
		remote  string
		host    string
		header  map[string]string
		want    User
		wantErr error
	}{
		{"reviewer token", full, "192.0.2.7:5000", "plumb.lab", map[string]string{"Authorization": "Bearer " + reviewerTok},
			User{"r.okafor", Reviewer, "token"}, nil},
		{"operator token", full, "192.0.2.7:5000", "plumb.lab", map[string]string{"Authorization": "Bearer " + operatorTok},
			User{"l.hart", Operator, "token"}, nil},
		{"shared token is an operator", full, "192.0.2.7:5000", "plumb.lab", map[string]string{"Authorization": "Bearer " + sharedTok},
			User{"shared token", Operator, "shared token"}, nil},
		{"wrong token", full, "127.0.0.1:5000", "localhost", map[string]string{"Authorization": "Bearer nope"}, User{}, ErrBadToken},
		{"not bearer", full, "127.0.0.1:5000", "localhost", map[string]string{"Authorization": "Basic eDp5"}, User{}, ErrBadToken},
		{"wrong token beats the proxy", full, "10.1.2.3:443", "plumb.lab",
			map[string]string{"Authorization": "Bearer nope", "X-Remote-User": "m.silva"}, User{}, ErrBadToken},
		{"proxy, listed user", full, "10.1.2.3:443", "plumb.lab", map[string]string{"X-Remote-User": "m.silva"},
			User{"m.silva", Reviewer, "proxy"}, nil},
		{"proxy over IPv6 loopback", full, "[::1]:443", "plumb.lab", map[string]string{"X-Remote-User": "m.silva"},
			User{"m.silva", Reviewer, "proxy"}, nil},
		{"proxy, unlisted user gets the proxy role", full, "10.1.2.3:443", "plumb.lab", map[string]string{"X-Remote-User": "guest.one"},
			User{"guest.one", Viewer, "proxy"}, nil},
		{"proxy, unlisted user refused", strict, "10.1.2.3:443", "plumb.lab", map[string]string{"X-Remote-User": "guest.one"},
			User{}, ErrForbidden},
		{"header from an untrusted peer is ignored", full, "10.9.9.9:443", "plumb.lab", map[string]string{"X-Remote-User": "m.silva"},
			User{"", Viewer, "anonymous"}, nil},
		{"anonymous", full, "192.0.2.7:5000", "plumb.lab", nil, User{"", Viewer, "anonymous"}, nil},
		{"loopback is not trusted once tokens exist", full, "127.0.0.1:5000", "localhost", nil, User{"", Viewer, "anonymous"}, nil},
		{"nothing configured: loopback acts", open, "127.0.0.1:5000", "localhost:8765", nil, User{"local", Operator, "local"}, nil},
		{"nothing configured: a bearer is ignored", open, "127.0.0.1:5000", "localhost", map[string]string{"Authorization": "Bearer x"},
			User{"local", Operator, "local"}, nil},
		{"nothing configured: rebinding host", open, "127.0.0.1:5000", "evil.example:8765", nil, User{"", Viewer, "anonymous"}, nil},
		{"nothing configured: remote", open, "192.0.2.7:5000", "localhost", nil, User{"", Viewer, "anonymous"}, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := httptest.NewRequest(http.MethodPost, "http://"+tt.host+"/api/x", nil)
			r.RemoteAddr, r.Host = tt.remote, tt.host
			for k, v := range tt.header {
				r.Header.Set(k, v)
			}
			got, err := tt.gate.Identify(r)
			if !errors.Is(err, tt.wantErr) || (tt.wantErr == nil && err != nil) {
				t.Fatalf("Identify: %v, want %v", err, tt.wantErr)
			}
			if got != tt.want {
				t.Errorf("Identify = %+v, want %+v", got, tt.want)
			}
		})
	}
}

func TestAllow(t *testing.T) {
	g, err := New(Config{Accounts: []Account{
		{Name: "r.okafor", Role: Reviewer, TokenHash: HashToken("rv-token-0123456789abcdef")},
		{Name: "l.hart", Role: Operator, TokenHash: HashToken("op-token-0123456789abcdef")},
	}})
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name   string
		token  string
		action Action
		status int
	}{
		{"reviewer excludes", "rv-token-0123456789abcdef", Exclude, http.StatusOK},
		{"reviewer re-baselines", "rv-token-0123456789abcdef", Rebaseline, http.StatusOK},
		{"operator acknowledges", "op-token-0123456789abcdef", Acknowledge, http.StatusOK},
		{"operator sets a quiet period", "op-token-0123456789abcdef", Quiet, http.StatusOK},
		{"operator may not exclude", "op-token-0123456789abcdef", Exclude, http.StatusForbidden},
		{"operator may not reinstate", "op-token-0123456789abcdef", Reinstate, http.StatusForbidden},
		{"anonymous may view", "", View, http.StatusOK},
		{"anonymous may not acknowledge", "", Acknowledge, http.StatusUnauthorized},
		{"bad token", "forged", View, http.StatusUnauthorized},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := httptest.NewRequest(http.MethodPost, "/api/x", nil)
			if tt.token != "" {
				r.Header.Set("Authorization", "Bearer "+tt.token)
			}
			_, err := g.Allow(r, tt.action)
			if got := Status(err); got != tt.status {
				t.Errorf("Allow(%s): %v (status %d), want status %d", tt.action, err, got, tt.status)
			}
		})
	}
}

func TestNew(t *testing.T) {
	h := HashToken("a-token-that-is-long-enough")
	tests := []struct {
		name string
		c    Config
	}{
		{"no name", Config{Accounts: []Account{{Role: Viewer, TokenHash: h}}}},
		{"twice", Config{Accounts: []Account{{Name: "a", Role: Viewer}, {Name: "a", Role: Operator}}}},
		{"no role", Config{Accounts: []Account{{Name: "a", TokenHash: h}}}},
		{"short hash", Config{Accounts: []Account{{Name: "a", Role: Viewer, TokenHash: h[:16]}}}},
		{"shared hash", Config{Accounts: []Account{{Name: "a", Role: Viewer, TokenHash: h}, {Name: "b", Role: Viewer, TokenHash: h}}}},
		{"proxy without addresses", Config{Proxy: &Proxy{Header: "X-User"}}},
		{"proxy without header", Config{Proxy: &Proxy{From: []netip.Prefix{netip.MustParsePrefix("10.0.0.0/8")}}}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			if _, err := New(tt.c); err == nil {
				t.Error("New accepted it")
			}
		})
	}
}

func TestNewToken(t *testing.T) {
	tok, hh, err := NewToken()
	if err != nil {
		t.Fatal(err)
	}
	if len(tok) != 43 {
		t.Errorf("token %q has %d characters, want 43 (32 bytes, base64url)", tok, len(tok))
	}
	if hh != hex.EncodeToString(HashToken(tok)) || len(hh) != 64 {
		t.Errorf("hash %s does not match the token", hh)
	}
	tok2, _, _ := NewToken()
	if tok2 == tok {
		t.Error("two tokens are equal")
	}
	// SHA-256("abc") from FIPS 180-2, appendix B.1.
	if got := hex.EncodeToString(HashToken("abc")); got != "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad" {
		t.Errorf("HashToken(abc) = %s", got)
	}
}

func TestParsePrefix(t *testing.T) {
	tests := []struct {
		in, want string
		bad      bool
	}{
		{"10.0.0.5", "10.0.0.5/32", false},
		{"10.0.0.77/24", "10.0.0.0/24", false},
		{"::1", "::1/128", false},
		{"::ffff:10.0.0.5", "10.0.0.5/32", false},
		{"fd00::/8", "fd00::/8", false},
		{"proxy.lab", "", true},
		{"10.0.0.0/33", "", true},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			p, err := ParsePrefix(tt.in)
			if (err != nil) != tt.bad || (!tt.bad && p.String() != tt.want) {
				t.Errorf("ParsePrefix(%q) = %v, %v; want %s", tt.in, p, err, tt.want)
			}
		})
	}
}
