package config

import (
	"errors"
	"strings"
	"testing"

	"plumb/engine"
)

const formModel = "state = \"a.db\"\n[[model]]\nname = \"a\"\nfolder = \"f\"\nresponse = \"y\"\nterms = [\"x\"]\n"

// TestFormKeys: the weights, pool_level and form_lapse keys, their
// defaults, and errors that name the key and its line.
func TestFormKeys(t *testing.T) {
	c, err := Parse(strings.NewReader(formModel+"weights = \"inverse(x^2)\"\n"), "p.toml")
	if err != nil {
		t.Fatal(err)
	}
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	m := c.Models[0]
	w, err := m.Weighting()
	if err != nil || w != (engine.Weighting{Column: "x", Power: 2}) {
		t.Errorf("weighting %+v, %v", w, err)
	}
	f := m.Alerts.FormLapse
	if !*f.Enabled || f.Severity != "warning" || f.Level != 0.01 || f.Refreshes != 2 || m.PoolLevel != 0.25 {
		t.Errorf("defaults: %+v pool_level %v", f, m.PoolLevel)
	}
	tests := []struct {
		name, src string
		line      int
		key       string
	}{
		{"bad weights", formModel + "weights = \"inverse(x^0)\"\n", 7, "model[1].weights"},
		{"unclosed inverse", formModel + "weights = \"inverse(x\"\n", 7, "model[1].weights"},
		{"pool level", formModel + "pool_level = 1\n", 7, "model[1].pool_level"},
		{"form level", formModel + "[model.alerts.form_lapse]\nlevel = 1.5\n", 8, "model[1].alerts.form_lapse.level"},
		{"form refreshes", formModel + "[model.alerts.form_lapse]\nlevel = 0.05\nrefreshes = -1\n", 9, "model[1].alerts.form_lapse.refreshes"},
		{"form severity", formModel + "[model.alerts.form_lapse]\nseverity = \"loud\"\n", 8, "model[1].alerts.form_lapse.severity"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c, err := Parse(strings.NewReader(tt.src), "p.toml")
			if err == nil {
				err = c.Validate()
			}
			var ce *Error
			if !errors.Is(err, ErrBadValue) || !errors.As(err, &ce) {
				t.Fatalf("err = %v", err)
			}
			if ce.Key != tt.key || (tt.line > 0 && ce.Line != tt.line) {
				t.Errorf("key %q line %d (%v); want %q line %d", ce.Key, ce.Line, err, tt.key, tt.line)
			}
		})
	}
}
