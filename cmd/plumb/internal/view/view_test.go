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
		{Fragility{Computed: true, K: 5}, "no set of up to 5 rows changes a conclusion"},
		{Fragility{Computed: true, Found: true, Index: 2, K: 5}, "2"},
	} {
		if got := tt.f.String(); got != tt.want {
			t.Errorf("%+v: got %q, want %q", tt.f, got, tt.want)
		}
	}
}

func TestThinPoints(t *testing.T) {
	pts := make([]Point, 10000)
	for i := range pts {
		pts[i] = Point{Row: i, Verdict: VerdictOrdinary}
	}
	for _, i := range []int{5, 500, 9999} {
		pts[i].Verdict = VerdictSuspect
	}
	out, dropped := ThinPoints(pts, 1000)
	if len(out)+dropped != len(pts) {
		t.Fatalf("kept %d + dropped %d != %d", len(out), dropped, len(pts))
	}
	if len(out) < 990 || len(out) > 1000 {
		t.Errorf("kept %d, want about 1000", len(out))
	}
	flagged := 0
	for i, p := range out {
		if p.Verdict == VerdictSuspect {
			flagged++
		}
		if i > 0 && out[i-1].Row >= p.Row {
			t.Fatal("order not kept")
		}
	}
	if flagged != 3 {
		t.Errorf("kept %d flagged points, want all 3", flagged)
	}
	if same, d := ThinPoints(pts[:50], 1000); len(same) != 50 || d != 0 {
		t.Error("small input changed")
	}
}
