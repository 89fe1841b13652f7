package config

import (
	"errors"
	"strings"
	"testing"
)

func TestCalibrationAndUnits(t *testing.T) {
	src := `[[model]]
name = "bench-b"
folder = "in"
response = "ref_temp_c"
terms = ["emf_mv", "emf_mv^2"]
units = { ref_temp_c = "°C", emf_mv = "mV" }
[model.calibration]
predict_at = [{ emf_mv = 10.0 }, { emf_mv = 40.0 }]
invert = [150.0, 400.0]
`
	c, err := Parse(strings.NewReader(src), "p.toml")
	if err != nil {
		t.Fatal(err)
	}
	if err := c.Validate(); err != nil {
		t.Fatal(err)
	}
	m := c.Models[0]
	if m.Units["ref_temp_c"] != "°C" || m.Units["emf_mv"] != "mV" {
		t.Errorf("units = %v", m.Units)
	}
	cal := m.Calibration
	if len(cal.PredictAt) != 2 || cal.PredictAt[1]["emf_mv"] != 40 || len(cal.Invert) != 2 || cal.Invert[0] != 150 {
		t.Errorf("calibration = %+v", cal)
	}
	if cal.Level != 0.95 || cal.ReadingsAveraged != 1 || cal.Range != nil {
		t.Errorf("calibration defaults = %+v", cal)
	}
}

func TestCalibrationErrors(t *testing.T) {
	head := "[[model]]\nname = \"a\"\nfolder = \"f\"\nresponse = \"y\"\nterms = [\"x\"]\n"
	tests := []struct {
		name, src, key string
		line           int
	}{
		{"level", "[model.calibration]\nlevel = 95.0\n", "model[1].calibration.level", 7},
		{"readings", "[model.calibration]\nreadings_averaged = -1\n", "model[1].calibration.readings_averaged", 7},
		{"range", "[model.calibration]\nrange = [5.0, 1.0]\n", "model[1].calibration.range", 7},
		{"empty point", "[model.calibration]\npredict_at = [{}]\n", "model[1].calibration.predict_at", 7},
		{"nan reading", "[model.calibration]\ninvert = [nan]\n", "model[1].calibration.invert", 7},
		{"empty unit", "units = { y = \"\" }\n", "model[1].units", 6},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c, err := Parse(strings.NewReader(head+tt.src), "p.toml")
			if err == nil {
				err = c.Validate()
			}
			if !errors.Is(err, ErrBadValue) {
				t.Fatalf("err = %v, want ErrBadValue", err)
			}
			var ce *Error
			if !errors.As(err, &ce) {
				t.Fatalf("err %T is not *Error", err)
			}
			if ce.Key != tt.key || ce.Line != tt.line {
				t.Errorf("key %q line %d, want %q line %d (%v)", ce.Key, ce.Line, tt.key, tt.line, err)
			}
		})
	}
}
