package alerts

import (
	"strings"
	"testing"
)

// TestDriftSuggestion: a drift alert's suggestion names the model's
// checkpoints (from the prediction measures) and says to check them with
// reference standards or recalibrate; never "collect near ...".
func TestDriftSuggestion(t *testing.T) {
	coef := DriftMeasure{Name: "emf_mv", Kind: DriftCoefficient}
	tests := []struct {
		name     string
		measures []DriftMeasure
		region   map[string][2]float64
		want     string
	}{
		{"two named checkpoints", []DriftMeasure{coef,
			{Name: "10 degC", Kind: DriftPrediction, At: Values{"emf_mv": 0.397}},
			{Name: "400 degC", Kind: DriftPrediction, At: Values{"emf_mv": 16.397}}}, nil,
			"check the calibration with reference standards at the checkpoints 10 degC (emf_mv = 0.397) and 400 degC (emf_mv = 16.4), or recalibrate"},
		{"three, one unnamed", []DriftMeasure{
			{Name: "low", Kind: DriftPrediction, At: Values{"x": 1}},
			{Name: "checkpoint x=5", Kind: DriftPrediction, At: Values{"x": 5}},
			{Kind: DriftPrediction, At: Values{"x": 9, "w": 2}}}, nil,
			"check the calibration with reference standards at the checkpoints low (x = 1), checkpoint x=5 and w = 2, x = 9, or recalibrate"},
		{"one", []DriftMeasure{{Name: "mid", Kind: DriftPrediction, At: Values{"x": 50}}}, nil,
			"check the calibration with reference standards at the checkpoint mid (x = 50), or recalibrate"},
		{"none, region", []DriftMeasure{coef}, map[string][2]float64{"emf_mv": {0, 21}},
			"check the calibration with reference standards at the low end, the middle and the high end of its operating range (emf_mv = 0; emf_mv = 10.5; emf_mv = 21), or recalibrate (the model names no checkpoints; configured checkpoints would be named here)"},
		{"none, no region", nil, nil,
			"check the calibration with reference standards across its operating range, or recalibrate (the model names no checkpoints; configured checkpoints would be named here)"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			s := DriftSuggestion(tc.measures, tc.region)
			if s == nil || s.Text != tc.want {
				t.Errorf("got  %+v\nwant %q", s, tc.want)
			}
			if s != nil && (strings.Contains(s.Text, "collect") || s.At != nil) {
				t.Errorf("suggestion %+v: want a check, not new coverage, and no single point", s)
			}
		})
	}
}
