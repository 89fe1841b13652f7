package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// plumb config check refuses calibration answers the model's terms cannot
// give, naming the model and the key.
func TestConfigCheckCalibration(t *testing.T) {
	tests := []struct{ name, terms, extra, want string }{
		{"invert two columns", `"x", "z"`, "[model.calibration]\ninvert = [1.0]\n", "calibration.invert"},
		{"point in another column", `"x"`, "[model.calibration]\npredict_at = [{ w = 1.0 }]\n", "calibration.predict_at"},
		{"unit of another column", `"x"`, "units = { q = \"s\" }\n", "units"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p := filepath.Join(t.TempDir(), "p.toml")
			src := "state = \"s.db\"\n[[model]]\nname = \"a\"\nfolder = \"f\"\nresponse = \"y\"\nterms = [" + tt.terms + "]\n" + tt.extra
			if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
				t.Fatal(err)
			}
			_, stderr, code := runPlumb(t, "", "config", "check", "--config", p)
			if code != 1 || !strings.Contains(stderr, `model[1] (model "a"): `+tt.want) {
				t.Errorf("exit %d, stderr %q; want exit 1 naming %s", code, stderr, tt.want)
			}
		})
	}
}
