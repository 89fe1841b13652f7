package view

import (
	"encoding/json"
	"math"
	"testing"
)

func TestFloatJSON(t *testing.T) {
	tests := []struct {
		name string
		in   Float
		want string
	}{
		{"finite", 1.5, "1.5"},
		{"nan", NaN(), "null"},
		{"posinf", Float(math.Inf(1)), "null"},
		{"neginf", Float(math.Inf(-1)), "null"},
		{"tiny", 1e-300, "1e-300"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			b, err := json.Marshal(struct{ V Float }{tt.in})
			if err != nil {
				t.Fatal(err)
			}
			if got := string(b); got != `{"V":`+tt.want+`}` {
				t.Fatalf("marshal = %s, want %s", got, tt.want)
			}
			var back struct{ V Float }
			if err := json.Unmarshal(b, &back); err != nil {
				t.Fatal(err)
			}
			if tt.in.Finite() != back.V.Finite() || (tt.in.Finite() && back.V != tt.in) {
				t.Fatalf("round trip %v -> %v", tt.in, back.V)
			}
		})
	}
}

func TestFragilityString(t *testing.T) {
	for _, tt := range []struct {
		f    Fragility
		want string
	}{
		{Fragility{}, "not computed"},
		{Fragility{Computed: true, K: 5}, "none within 5"},
		{Fragility{Computed: true, Found: true, Index: 2, K: 5}, "2"},
	} {
		if got := tt.f.String(); got != tt.want {
			t.Errorf("%+v: got %q, want %q", tt.f, got, tt.want)
		}
	}
}
