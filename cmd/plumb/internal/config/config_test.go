package config

import (
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

func TestParseMinimal(t *testing.T) {
	src := `state = "plumb.db"                 # SQLite file, relative to this file
[[model]]
name = "bench-b"
folder = "incoming/bench-b"        # relative to this file
pattern = "*.csv"
response = "ref_temp_c"
terms = ["emf_mv", "emf_mv^2"]

[[route]]
name = "oncall"
kind = "webhook"
url = "http://127.0.0.1:9911/hook"
secret_env = "PLUMB_HOOK_SECRET"
`
	c, err := Parse(strings.NewReader(src), "plumb.toml")
	if err != nil {
		t.Fatal(err)
	}
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	m := c.Models[0]
	if m.Name != "bench-b" || len(m.Terms) != 2 || !*m.Intercept || m.Delimiter != "," {
		t.Errorf("model = %+v", m)
	}
	if m.Judge.Alpha != 0.05 || m.Fragility.MaxRemoved != 3 || m.Fragility.Limit != 2 || m.Suggest.Replicates != 3 {
		t.Errorf("defaults not applied: %+v %+v %+v", m.Judge, m.Fragility, m.Suggest)
	}
	if c.Routes[0].MaxAttempts != 8 || c.Routes[0].Timeout.Seconds() != 10 {
		t.Errorf("route defaults: %+v", c.Routes[0])
	}
	if c.Listen != "127.0.0.1:8765" {
		t.Errorf("listen default = %q", c.Listen)
	}
}

func TestErrorsNameKeyAndLine(t *testing.T) {
	tests := []struct {
		name     string
		src      string
		sentinel error
		line     int
		key      string
	}{
		{"unknown top key", "state = \"a.db\"\nstat = 1\n", ErrUnknownKey, 2, "stat"},
		{"unknown model key", "[[model]]\nname = \"a\"\nfolder = \"f\"\nresponse = \"y\"\nterms = [\"x\"]\nalpah = 0.1\n", ErrUnknownKey, 6, "model.alpah"},
		{"unknown nested key", "[[model]]\nname = \"a\"\n[model.judge]\nalpah = 0.1\n", ErrUnknownKey, 4, "model.judge.alpah"},
		{"wrong type", "[[model]]\nname = \"a\"\nmin_rows = \"ten\"\n", ErrSyntax, 3, ""},
		{"syntax", "state = \n", ErrSyntax, 1, ""},
		{"bad alpha", "[[model]]\nname = \"a\"\nfolder = \"f\"\nresponse = \"y\"\nterms = [\"x\"]\n[model.judge]\nalpha = 1.5\n", ErrBadValue, 7, "model[1].judge.alpha"},
		{"missing response, second model", "[[model]]\nname = \"a\"\nfolder = \"f\"\nresponse = \"y\"\nterms = [\"x\"]\n\n[[model]]\nname = \"b\"\nfolder = \"g\"\nterms = [\"x\"]\n", ErrMissing, 7, "model[2].response"},
		{"missing token with the delimiter", "[[model]]\nname = \"a\"\nfolder = \"f\"\nresponse = \"y\"\nterms = [\"x\"]\nmissing = [\"NA\", \"n,a\"]\n", ErrBadValue, 6, "model[1].missing"},
		{"bad route kind", "[[route]]\nname = \"r\"\nkind = \"pager\"\n", ErrBadValue, 3, "route[1].kind"},
		{"unknown route", "[[model]]\nname = \"a\"\nfolder = \"f\"\nresponse = \"y\"\nterms = [\"x\"]\nroutes = [\"nope\"]\n", ErrBadValue, 6, "model[1].routes"},
		{"bad duration", "[watch]\ndebounce = \"soon\"\n", ErrSyntax, 2, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c, err := Parse(strings.NewReader(tt.src), "p.toml")
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
			if ce.Line != tt.line {
				t.Errorf("line = %d, want %d (%v)", ce.Line, tt.line, err)
			}
			if tt.key != "" && ce.Key != tt.key {
				t.Errorf("key = %q, want %q", ce.Key, tt.key)
			}
			if !strings.HasPrefix(err.Error(), "p.toml:") {
				t.Errorf("error does not start with the file name: %v", err)
			}
		})
	}
}

func TestLoadResolvesRelativeToFile(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "plumb.toml")
	if err := os.WriteFile(p, []byte("state = \"s/plumb.db\"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := Load(p)
	if err != nil {
		t.Fatal(err)
	}
	if got := c.Resolve(c.State); got != filepath.Join(dir, "s", "plumb.db") {
		t.Errorf("Resolve = %q", got)
	}
}

// TestPublicNames: public_names takes host names and addresses as a Host
// header carries them, and says what is wrong with anything else, with
// the line.
func TestPublicNames(t *testing.T) {
	c, err := Parse(strings.NewReader("state = \"a.db\"\npublic_names = [\"plumb.lab.example\", \"PLUMB-2.lab.example.\", \"192.0.2.7\", \"[2001:db8::7]\", \"2001:db8::8\"]\n"), "p.toml")
	if err != nil {
		t.Fatal(err)
	}
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	if len(c.PublicNames) != 5 || c.PublicNames[0] != "plumb.lab.example" {
		t.Errorf("public_names = %v", c.PublicNames)
	}
	if d := Default(); len(d.PublicNames) != 0 {
		t.Errorf("default public_names = %v, want none", d.PublicNames)
	}
	for _, bad := range []struct{ name, want string }{
		{"https://plumb.lab.example", "without the scheme"},
		{"plumb.lab.example:8765", "without a port"},
		{"plumb.lab.example/dash", "without a path"},
		{"*.lab.example", "wildcards"},
		{"", "empty"},
		{"plumb..example", "1 to 63 characters"},
		{"plumb lab", "not allowed"},
		{"-plumb.example", "starts or ends with '-'"},
	} {
		t.Run(bad.name, func(t *testing.T) {
			c, err := Parse(strings.NewReader("state = \"a.db\"\n\npublic_names = [\"ok.example\", \""+bad.name+"\"]\n"), "p.toml")
			if err != nil {
				t.Fatal(err)
			}
			err = c.Validate()
			if !errors.Is(err, ErrBadValue) {
				t.Fatalf("err = %v, want ErrBadValue", err)
			}
			var ce *Error
			if !errors.As(err, &ce) || ce.Key != "public_names" || ce.Line != 3 || !strings.Contains(err.Error(), bad.want) {
				t.Errorf("err = %v (key %q, line %d), want key public_names, line 3, %q", err, ce.Key, ce.Line, bad.want)
			}
		})
	}
}

// TestPublicURL: public_url takes an http or https address; its host is
// served like a public name; a bad one is an error at its line.
func TestPublicURL(t *testing.T) {
	c, err := Parse(strings.NewReader("state = \"a.db\"\npublic_names = [\"proxy.lab.example\"]\npublic_url = \"https://plumb.lab.example:8443/\"\n"), "p.toml")
	if err != nil {
		t.Fatal(err)
	}
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	if got := c.PublicHosts(); !slices.Equal(got, []string{"proxy.lab.example", "plumb.lab.example"}) {
		t.Errorf("PublicHosts = %v", got)
	}
	for _, bad := range []string{"plumb.lab.example", "ftp://plumb.lab.example", "https://", "https://plumb.lab.example/?a=1", "https://u@plumb.lab.example"} {
		c, err := Parse(strings.NewReader("state = \"a.db\"\n\npublic_url = \""+bad+"\"\n"), "p.toml")
		if err != nil {
			t.Fatal(err)
		}
		err = c.Validate()
		var es Errors
		if !errors.As(err, &es) || len(es) != 1 || es[0].Line != 3 || es[0].Key != "public_url" || !errors.Is(err, ErrBadValue) {
			t.Errorf("public_url %q: %v, want one bad value at line 3", bad, err)
		}
	}
}
