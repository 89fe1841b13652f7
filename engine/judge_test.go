package engine

import (
	"math"
	"testing"
)

// A calibration line with 40 evenly spaced standards (invented scenario).
func calibrationLine() (x, y []float64) {
	n := 40
	x = make([]float64, n)
	y = make([]float64, n)
	for i := range x {
		x[i] = float64(i) / 4
		y[i] = 0.2 + 1.5*x[i] + 0.05*math.Sin(float64(i)*2.3)
	}
	return x, y
}

// With default cutoffs, a large outlier at low leverage (the middle of the
// range) is an outlier but not influential: Cook's D stays far below the F
// median and |DFFITS|, |DFBETAS| below 1, while its Bonferroni p is tiny.
func TestJudgeLowLeverageOutlier(t *testing.T) {
	x, y := calibrationLine()
	y[20] += 0.18 // about 5 residual SDs of the other standards
	f := fitXY(t, x, y)
	inf := Diagnose(f)
	vs := Judge(inf, DefaultCutoffs())
	v, o := vs[20], inf.Rows[20]
	if !v.Outlier || v.Influential || v.Word() != "outlier" {
		t.Errorf("row 20: %s (outlier %v influential %v), flags %+v; h %.3f D %.3f DFFITS %.3f",
			v.Word(), v.Outlier, v.Influential, v.Flags, o.Leverage, o.Cook, o.DFFITS)
	}
	if !(o.BonferroniP < 1e-3) {
		t.Errorf("Bonferroni p %g, want tiny", o.BonferroniP)
	}
	for i, v := range vs {
		if i != 20 && (v.Outlier || v.Influential) {
			t.Errorf("row %d: %s, flags %+v", i, v.Word(), v.Flags)
		}
	}
}

// A high-leverage point exactly on the line is neither an outlier nor
// influential; its leverage (and COVRATIO) make it notable only.
func TestJudgeHighLeverageOnLine(t *testing.T) {
	x, y := calibrationLine()
	x = append(x, 60)
	y = append(y, 0.2+1.5*60)
	f := fitXY(t, x, y)
	inf := Diagnose(f)
	vs := Judge(inf, DefaultCutoffs())
	last := len(x) - 1
	v, o := vs[last], inf.Rows[last]
	if v.Outlier || v.Influential || !v.Notable || v.Word() != "notable" {
		t.Errorf("high-leverage row: %s, flags %+v", v.Word(), v.Flags)
	}
	var lev bool
	for _, fl := range v.Flags {
		if fl.Measure == MeasureLeverage && fl.Family == FamilySizeAdjusted {
			lev = true
			if fl.Value != o.Leverage || fl.Cutoff != 2*2.0/float64(len(x)) {
				t.Errorf("leverage flag %+v, want value %v cutoff %v", fl, o.Leverage, 4.0/float64(len(x)))
			}
		}
	}
	if !lev || o.Leverage < 0.5 {
		t.Errorf("leverage %.3f not flagged (flags %+v)", o.Leverage, v.Flags)
	}
}

// The same high-leverage point moved off the line is influential and an
// outlier: suspect. The dfbetas flags name the term.
func TestJudgeSuspect(t *testing.T) {
	x, y := calibrationLine()
	x = append(x, 60)
	y = append(y, 0.2+1.5*60+3)
	f := fitXY(t, x, y)
	vs := Judge(Diagnose(f), DefaultCutoffs())
	v := vs[len(x)-1]
	if v.Word() != "suspect" {
		t.Fatalf("row: %s, flags %+v", v.Word(), v.Flags)
	}
	var term bool
	for _, fl := range v.Flags {
		if fl.Measure == MeasureDFBETAS && fl.Family == FamilyAbsolute && fl.Term == "x" && math.Abs(fl.Value) > 1 && fl.Cutoff == 1 {
			term = true
		}
	}
	if !term {
		t.Errorf("no absolute dfbetas flag naming x: %+v", v.Flags)
	}
}

// Cook rule CookOne uses 1; CookFMedian the F median (CHECKS.md §A3:
// F(0.5; 3, 22) = 0.8137).
func TestCutoffLimits(t *testing.T) {
	c := DefaultCutoffs()
	l := CutoffLimits(c, 25, 3)
	if !near(l.CookAbsolute, 0.8137, 4) || l.DFFITSAbsolute != 1 || l.DFBETASAbsolute != 1 {
		t.Errorf("absolute limits %+v", l)
	}
	if l.CookSize != 4.0/25 || l.DFFITSSize != 2*math.Sqrt(3.0/25) || l.DFBETASSize != 2.0/5 ||
		l.Leverage != 6.0/25 || l.COVRATIO != 9.0/25 {
		t.Errorf("size-adjusted limits %+v", l)
	}
	c.Cook = CookOne
	if l := CutoffLimits(c, 25, 3); l.CookAbsolute != 1 {
		t.Errorf("CookOne limit %v", l.CookAbsolute)
	}
}

func TestVerdictWord(t *testing.T) {
	cases := []struct {
		v    Verdict
		want Word
	}{
		{Verdict{}, "ordinary"},
		{Verdict{Notable: true}, "notable"},
		{Verdict{Outlier: true}, "outlier"},
		{Verdict{Outlier: true, Notable: true}, "outlier"},
		{Verdict{Influential: true}, "influential"},
		{Verdict{Outlier: true, Influential: true}, "suspect"},
	}
	for _, c := range cases {
		if got := c.v.Word(); got != c.want {
			t.Errorf("%+v.Word() = %q, want %q", c.v, got, c.want)
		}
	}
	vs := []Verdict{{}, {Outlier: true, Influential: true}, {Notable: true}, {Outlier: true, Influential: true}}
	if got := Flagged(vs, "suspect", "notable"); len(got) != 3 || got[0] != 1 || got[1] != 2 || got[2] != 3 {
		t.Errorf("Flagged = %v", got)
	}
	for i, w := range Words {
		if want := len(Words) - 1 - i; w.Rank() != want {
			t.Errorf("%s.Rank() = %d, want %d", w, w.Rank(), want)
		}
	}
	if Word("").Rank() != 0 {
		t.Errorf("the empty word ranks %d, want 0", Word("").Rank())
	}
}

// A row with leverage 1 has NaN deletion measures, crosses no cutoff on
// them, and does not break Judge.
func TestLeverageOne(t *testing.T) {
	m, _ := NewModel("y", []string{"x", "d"}, true)
	X, y, err := m.Design(map[string][]float64{
		"x": {1, 2, 3, 4, 5, 6}, "d": {0, 0, 0, 0, 0, 1}, "y": {1.1, 2.0, 2.9, 4.2, 5.0, 9},
	})
	if err != nil {
		t.Fatal(err)
	}
	f, err := Refit(m, X, y)
	if err != nil {
		t.Fatal(err)
	}
	inf := Diagnose(f)
	o := inf.Rows[5]
	if math.Abs(o.Leverage-1) > 1e-12 || !math.IsNaN(o.Cook) || !math.IsNaN(o.StudentExternal) || !math.IsNaN(inf.DFBETASRow(5)[0]) {
		t.Errorf("leverage-1 row: %+v", o)
	}
	v := Judge(inf, DefaultCutoffs())[5]
	for _, fl := range v.Flags {
		if fl.Measure != MeasureLeverage {
			t.Errorf("unexpected flag on a NaN measure: %+v", fl)
		}
	}
}
