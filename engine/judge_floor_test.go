package engine

import "testing"

// TestFMedianFloor: the median of F(d1, d2) never falls below fMedianFloor,
// which lets Judge skip computing it when no Cook's distance exceeds the
// floor. The infimum is the median of chi-squared(1), 0.45494 (common
// practice: F(1, d2) = t(d2)^2, whose median falls with d2 toward it).
func TestFMedianFloor(t *testing.T) {
	for d1 := 1.0; d1 <= 60; d1++ {
		for _, d2 := range []float64{1, 2, 3, 5, 10, 30, 100, 1e3, 1e4, 1e6} {
			if m := FQuantile(0.5, d1, d2); !(m > fMedianFloor) {
				t.Errorf("median of F(%g, %g) = %g, not above the floor %g", d1, d2, m, fMedianFloor)
			}
		}
	}
}

// TestJudgeFloorSameVerdicts: judging with and without the shortcut gives
// no absolute Cook flag below the floor, and the real F median above it.
func TestJudgeFloorSameVerdicts(t *testing.T) {
	rows := []Obs{{Cook: 0.1, DFFITS: 0.2, Leverage: 0.1, COVRATIO: 1}, {Cook: 0.44, DFFITS: 0.9, Leverage: 0.2, COVRATIO: 1}}
	m, err := NewModel("y", []string{"x"}, true)
	if err != nil {
		t.Fatal(err)
	}
	inf := &Influence{Fit: &Fit{Model: m, N: 20, P: 2}, Rows: rows}
	got := Judge(inf, DefaultCutoffs())
	for i, v := range got {
		for _, f := range v.Flags {
			if f.Measure == MeasureCook && f.Family == FamilyAbsolute {
				t.Errorf("row %d: absolute Cook flag below the floor: %+v", i, f)
			}
		}
	}
	// With a row above the floor the real median is used.
	rows = append(rows, Obs{Cook: 2, DFFITS: 0.1, Leverage: 0.1, COVRATIO: 1})
	inf.Rows = rows
	v := Judge(inf, DefaultCutoffs())[2]
	want := FQuantile(0.5, 2, 18)
	found := false
	for _, f := range v.Flags {
		if f.Measure == MeasureCook && f.Family == FamilyAbsolute {
			found = true
			if f.Cutoff != want {
				t.Errorf("cutoff %g, want the F median %g", f.Cutoff, want)
			}
		}
	}
	if !found {
		t.Error("Cook's distance 2 not flagged")
	}
}
