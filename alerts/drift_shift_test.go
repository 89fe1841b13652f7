package alerts

import (
	"encoding/json"
	"strings"
	"testing"
)

func TestShiftSentence(t *testing.T) {
	ms := []DriftMeasure{
		{Name: "emf_mv", Kind: DriftCoefficient, Baseline: 24, Current: 24.1, StdError: 0.01},
		{Name: "hot end", Kind: DriftPrediction, At: Values{"emf_mv": 10.4}, Baseline: 250, Current: 250.41,
			StdError: 0.1, ShiftSE: 0.08, Unit: "°C", AtUnits: map[string]string{"emf_mv": "mV"}},
		{Name: "cold end", Kind: DriftPrediction, At: Values{"emf_mv": 2}, Baseline: 50, Current: 49.5, StdError: 0.1, ShiftSE: 0.125},
		{Name: "unknown", Kind: DriftPrediction, At: Values{"emf_mv": 3}, Baseline: 50, Current: 49.5, StdError: 0.1},
	}
	got := shiftSentence(ms)
	want := "At the checkpoints (± one standard error of the shift): at emf_mv = 10.4 mV the curve now reads 0.41 °C higher (± 0.08 °C); at emf_mv = 2 the curve now reads 0.5 lower (± 0.125). "
	if got != want {
		t.Errorf("got  %q\nwant %q", got, want)
	}
	if s := shiftSentence(ms[:1]); s != "" {
		t.Errorf("no prediction measure: %q", s)
	}

	// The shift's standard error and the units travel in the alert's JSON.
	b, err := json.Marshal(ms[1])
	if err != nil {
		t.Fatal(err)
	}
	for _, w := range []string{`"shift_se":0.08`, `"unit":"°C"`, `"at_units":{"emf_mv":"mV"}`} {
		if !strings.Contains(string(b), w) {
			t.Errorf("%s lacks %s", b, w)
		}
	}
	var back DriftMeasure
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	if back.ShiftSE != 0.08 || back.Unit != "°C" || back.AtUnits["emf_mv"] != "mV" {
		t.Errorf("round trip: %+v", back)
	}
	b, _ = json.Marshal(ms[0])
	if strings.Contains(string(b), "shift_se") {
		t.Errorf("a coefficient has no shift_se: %s", b)
	}
}

// A checkpoint with units names them in the drift explanation.
func TestDriftExplanationUnits(t *testing.T) {
	var a Alert
	c := DriftCondition{Model: "bench-a", Baseline: "fit after the first 30 rows", Measures: []DriftMeasure{
		{Name: "hot end", Kind: DriftPrediction, At: Values{"emf_mv": 10}, Baseline: 250, Current: 250.41, StdError: 0.1,
			Difference: 0.41, Band: 0.3, Rule: "k_se", ShiftSE: 0.08, Unit: "°C", AtUnits: map[string]string{"emf_mv": "mV"}},
	}}
	fillDrift(&a, c, DriftRule{K: 3})
	for _, want := range []string{"the prediction at checkpoint hot end is 250.4 °C against 250 °C at baseline, 4.1 standard errors away",
		"at emf_mv = 10 mV the curve now reads 0.41 °C higher (± 0.08 °C)"} {
		if !strings.Contains(a.Explanation, want) {
			t.Errorf("explanation lacks %q:\n%s", want, a.Explanation)
		}
	}
}
