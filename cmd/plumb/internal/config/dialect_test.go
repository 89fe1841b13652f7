package config

import (
	"errors"
	"strings"
	"testing"
)

func TestParseDelimiter(t *testing.T) {
	tests := []struct {
		in   string
		want byte
		ok   bool
	}{
		{",", ',', true}, {";", ';', true}, {"|", '|', true},
		{"tab", '\t', true}, {`\t`, '\t', true}, {"\t", '\t', true},
		{"", 0, false}, {";;", 0, false}, {`"`, 0, false}, {"\n", 0, false}, {"é", 0, false},
	}
	for _, tt := range tests {
		got, err := ParseDelimiter(tt.in)
		if (err == nil) != tt.ok || got != tt.want {
			t.Errorf("ParseDelimiter(%q) = %q, %v; want %q, ok %v", tt.in, got, err, tt.want, tt.ok)
		}
	}
}

// TestDialectKeys: the dialect keys take the values the inspect flags
// take, and a bad one names its key.
func TestDialectKeys(t *testing.T) {
	model := func(extra string) error {
		src := "[[model]]\nname = \"m\"\nfolder = \"d\"\nresponse = \"y\"\nterms = [\"x\"]\n" + extra
		c, err := Parse(strings.NewReader(src), "t.toml")
		if err != nil {
			return err
		}
		return c.Validate()
	}
	for _, ok := range []string{
		"delimiter = \"tab\"\ndecimal_comma = true\n",
		"delimiter = ';'\ndecimal_comma = true\ncomment = \"#\"\nmissing = [\"NA\", \"\"]\nid_column = \"serial\"\n",
	} {
		if err := model(ok); err != nil {
			t.Errorf("%q: %v", ok, err)
		}
	}
	for _, bad := range []struct{ src, key string }{
		{"decimal_comma = true\n", "decimal_comma"},
		{"delimiter = \";;\"\n", "delimiter"},
		{"delimiter = \";\"\nmissing = [\"n;a\"]\n", "missing"},
		{"delimiter = \";\"\ncomment = \";c\"\n", "comment"},
	} {
		err := model(bad.src)
		var e *Error
		if !errors.As(err, &e) || !strings.HasSuffix(e.Key, "."+bad.key) || !errors.Is(err, ErrBadValue) {
			t.Errorf("%q: %v; want a bad value at key %s", bad.src, err, bad.key)
		}
	}
	if c := (&Model{Delimiter: "tab"}).Dialect(); c.Delimiter != '\t' {
		t.Errorf("Dialect of delimiter \"tab\": %q", c.Delimiter)
	}
}
