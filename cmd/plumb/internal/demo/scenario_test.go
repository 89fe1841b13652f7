package demo

import (
	"math"
	"reflect"
	"testing"

	"plumb/engine"
)

func TestScenarioShape(t *testing.T) {
	sc := Scenario()
	if !reflect.DeepEqual(sc, Scenario()) {
		t.Fatal("Scenario is not deterministic")
	}
	order := []Phase{PhaseOrdinary, PhaseLeverage, PhaseMidOutlier, PhaseEdgeOutlier, PhaseFollowUp, PhaseDrift}
	count := map[Phase]int{}
	expects := map[Expect]int{}
	pos := 0
	sensors := map[string]bool{}
	for i, r := range sc {
		if r.Index != i || r.Line() != i+2 {
			t.Errorf("reading %d: Index %d, Line %d", i, r.Index, r.Line())
		}
		for pos < len(order) && order[pos] != r.Phase {
			pos++
		}
		if pos == len(order) {
			t.Fatalf("reading %d: phase %q out of order", i, r.Phase)
		}
		count[r.Phase]++
		expects[r.Expect]++
		if r.Note == "" {
			t.Errorf("reading %d has no note", i)
		}
		if sensors[r.Sensor] {
			t.Errorf("sensor %s appears twice", r.Sensor)
		}
		sensors[r.Sensor] = true
		// Values as written: two decimals for degC, four for mV.
		if r.RefTempC != math.Round(r.RefTempC*100)/100 || math.Abs(r.EmfMV*1e4-math.Round(r.EmfMV*1e4)) > 1e-6 {
			t.Errorf("reading %d: %v, %v not at the written precision", i, r.RefTempC, r.EmfMV)
		}
		// Every reading lies in the bench's range and near the curve
		// (the planted shifts are at most 60 microvolts).
		if r.RefTempC < 0 || r.RefTempC > 500 || r.EmfMV < RegionLow-0.1 || r.EmfMV > RegionHigh {
			t.Errorf("reading %d out of range: %v degC, %v mV", i, r.RefTempC, r.EmfMV)
		}
		if d := math.Abs(trueEMF(r.RefTempC) - r.EmfMV); d > 0.08 {
			t.Errorf("reading %d: %v mV is %v mV off the curve", i, r.EmfMV, d)
		}
	}
	want := map[Phase]int{PhaseOrdinary: 30, PhaseLeverage: 1, PhaseMidOutlier: 1, PhaseEdgeOutlier: 1, PhaseFollowUp: 4, PhaseDrift: 21}
	if !reflect.DeepEqual(count, want) {
		t.Errorf("phases %v, want %v", count, want)
	}
	for _, e := range []Expect{ExpectOutlierOnly, ExpectSuspect, ExpectFragilityClears, ExpectDrift} {
		if expects[e] != 1 {
			t.Errorf("%d readings expect %s, want 1", expects[e], e)
		}
	}
	// The ordinary readings cover the usual range, the far reading lies
	// well beyond it, the edge outlier and follow-ups below it.
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, r := range sc {
		if r.Phase == PhaseOrdinary {
			lo, hi = math.Min(lo, r.RefTempC), math.Max(hi, r.RefTempC)
		}
	}
	if lo > 51 || hi < 349 {
		t.Errorf("ordinary readings span %v..%v degC, want 50..350", lo, hi)
	}
	for _, r := range sc {
		switch r.Phase {
		case PhaseLeverage:
			if r.RefTempC < hi+100 {
				t.Errorf("the far reading at %v degC is not far beyond %v", r.RefTempC, hi)
			}
		case PhaseEdgeOutlier, PhaseFollowUp:
			if r.RefTempC > lo-30 {
				t.Errorf("%s reading at %v degC is not below the usual range", r.Phase, r.RefTempC)
			}
		}
	}
}

func TestTrueCurve(t *testing.T) {
	for _, temp := range []float64{0, 10, 50, 200, 350, 460, 500} {
		if got := trueTemp(trueEMF(temp)); math.Abs(got-temp) > 1e-9 {
			t.Errorf("trueTemp(trueEMF(%v)) = %v", temp, got)
		}
	}
	// The thermo-voltages of the checkpoints are the curve's at 10 and
	// 400 degC, to the 0.01 mV they are written with.
	for i, temp := range []float64{10, 400} {
		if d := math.Abs(trueEMF(temp) - Checkpoints[i].EmfMV); d > 0.005 {
			t.Errorf("checkpoint %q at %v mV, the curve gives %v mV at %v degC", Checkpoints[i].Name, Checkpoints[i].EmfMV, trueEMF(temp), temp)
		}
	}
}

func TestExpected(t *testing.T) {
	o := Expected()
	want := Outcomes{Suspect: []int{34}, OutlierOnly: []int{33}, Leverage: 32, FragileFrom: 34, FragileUntil: 36, Drift: 57, Lines: 59}
	if !reflect.DeepEqual(o, want) {
		t.Errorf("Expected() = %+v, want %+v", o, want)
	}
}

// TestPlantsAgainstR checks the engine's diagnostics of the planted
// readings, when each arrives, against R. Source: R 4.2.2 (r-base-core),
// with d the scenario written as CSV (ref_temp_c, emf_mv) and rows 1..n
// the readings up to and including the plant:
//
//	f <- lm(ref_temp_c ~ emf_mv + I(emf_mv^2), data = d[1:n, ])
//	hatvalues(f)[n]; t <- rstudent(f)[n]; cooks.distance(f)[n]; dffits(f)[n]
//	min(1, n*2*pt(-abs(t), n-4)); qf(0.5, 3, n-3)
func TestPlantsAgainstR(t *testing.T) {
	refs := []struct {
		line                          int
		n                             int
		h, t, cook, dffits, bonf, cut float64
	}{
		{32, 31, 0.6520628823, -0.3571476128, 0.08224516083, -0.4889248492, 1, 0.8082103429},
		{33, 32, 0.04877721192, 3.985750521, 0.1794335475, 0.9025628939, 0.01397012374, 0.8075254275},
		{34, 33, 0.2294086748, -11.00881319, 2.402228052, -6.006664324, 2.35566332e-10, 0.8068868749},
		{35, 34, 0.2179034469, 1.172737446, 0.1261995145, 0.619017115, 1, 0.8062901316},
	}
	ar := replay(t, Scenario(), Checkpoints)
	near := func(what string, line int, got, want float64) {
		t.Helper()
		if math.Abs(got-want) > 1e-8*math.Max(1, math.Abs(want)) {
			t.Errorf("line %d: %s = %.12g, R gives %.10g", line, what, got, want)
		}
	}
	for _, ref := range refs {
		a := ar[ref.line-2]
		if a.n != ref.n || a.fit.N != ref.n {
			t.Fatalf("line %d: n = %d (window %d), want %d", ref.line, a.n, a.fit.N, ref.n)
		}
		o := a.full
		near("leverage", ref.line, o.Leverage, ref.h)
		near("rstudent", ref.line, o.StudentExternal, ref.t)
		near("Cook's D", ref.line, o.Cook, ref.cook)
		near("DFFITS", ref.line, o.DFFITS, ref.dffits)
		near("Bonferroni p", ref.line, o.BonferroniP, ref.bonf)
		near("Cook cutoff", ref.line, engine.CutoffLimits(engine.DefaultCutoffs(), a.n, a.fit.P).CookAbsolute, ref.cut)
	}
}
