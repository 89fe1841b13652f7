package main

import (
	"encoding/json"
	"math"
	"strings"
	"testing"

	"plumb/store"
)

// TestStatusFitJSONNull: an undefined number of a stored fit (sigma of an
// exact fit, an estimate of an aliased term) is null in status's JSON,
// as in every JSON plumb writes, and the document still encodes.
func TestStatusFitJSONNull(t *testing.T) {
	f := store.FitRecord{ID: 7, N: 3, Sigma: math.NaN(), RSquared: 1, Terms: []string{"intercept", "dose"},
		Estimates: []float64{1.5, math.Inf(1)}, StdErrors: []float64{math.NaN(), 0.25}, Fragility: -2}
	b, err := json.Marshal(fitOutOf(f))
	if err != nil {
		t.Fatalf("marshal: %v", err)
	}
	for _, want := range []string{`"sigma":null`, `"r_squared":1`, `"estimates":{"dose":null,"intercept":1.5}`, `"std_errors":{"dose":0.25,"intercept":null}`} {
		if !strings.Contains(string(b), want) {
			t.Errorf("status fit JSON %s\nlacks %s", b, want)
		}
	}
}
