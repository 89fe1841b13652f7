package demo

import (
	"fmt"
	"math"
	"testing"

	"plumb/engine"
)

// arrival is what the engine says when reading k arrives, as the daemon
// computes it. The model fits a window (the last WindowRows rows), so the
// arrival verdict judges the row against the fit of the window that
// includes it; the refresh that follows fits the same window and yields
// the influence table, the fragility and the drift measures (on the window
// without its suspect rows).
type arrival struct {
	verdict engine.Verdict // of reading k, against the window's fit
	full    engine.Obs     // its diagnostics in that fit
	n       int            // rows in that fit
	rows    []Reading      // the window, oldest first; rows[len-1] is reading k
	fit     *engine.Fit    // of the window
	inf     *engine.Influence
	frag    engine.FragilityResult
	drift   []driftMeasure // nil before the baseline exists
}

type driftMeasure struct {
	name              string
	baseline, current float64
	se                float64 // baseline standard error
}

func (d driftMeasure) z() float64 { return (d.current - d.baseline) / d.se }

func (d driftMeasure) out() bool { return math.Abs(d.current-d.baseline) > DriftK*d.se }

func anyDrift(ds []driftMeasure) bool {
	for _, d := range ds {
		if d.out() {
			return true
		}
	}
	return false
}

// maxZ is the largest |z| of the measures (0 for none).
func maxZ(ds []driftMeasure) float64 {
	m := 0.0
	for _, d := range ds {
		m = math.Max(m, math.Abs(d.z()))
	}
	return m
}

func demoModel(t testing.TB) engine.Model {
	t.Helper()
	m, err := engine.NewModel(Response, Terms, true)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func fitRows(t testing.TB, m engine.Model, rows []Reading) *engine.Fit {
	t.Helper()
	cols := map[string][]float64{Response: nil, Predictor: nil}
	for _, r := range rows {
		cols[Response] = append(cols[Response], r.RefTempC)
		cols[Predictor] = append(cols[Predictor], r.EmfMV)
	}
	X, y, err := m.Design(cols)
	if err != nil {
		t.Fatal(err)
	}
	f, err := engine.Refit(m, X, y)
	if err != nil {
		t.Fatalf("fit of %d rows: %v", len(rows), err)
	}
	return f
}

// conclusions are what the demo config makes the fit's conclusions: the
// defaults (sign and significance of each non-intercept coefficient) and
// the checkpoints.
func conclusions(cps []Checkpoint) engine.Conclusions {
	c := engine.DefaultConclusions()
	for _, cp := range cps {
		c.Checkpoints = append(c.Checkpoints, engine.Checkpoint{Name: cp.Name, At: map[string]float64{Predictor: cp.EmfMV}, Tolerance: cp.Tolerance})
	}
	return c
}

func predictAt(t testing.TB, f *engine.Fit, emf float64) (yhat, se float64) {
	t.Helper()
	z := make([]float64, f.P)
	if err := f.Model.DesignRow(z, func(string) float64 { return emf }); err != nil {
		t.Fatal(err)
	}
	return f.Predict(z)
}

// replay runs the engine over the scenario as the daemon sees it.
func replay(t testing.TB, sc []Reading, cps []Checkpoint) []arrival {
	t.Helper()
	m := demoModel(t)
	base := fitRows(t, m, sc[:BaselineRows])
	out := make([]arrival, len(sc))
	for k := range sc {
		if k+1 < MinRows {
			continue
		}
		lo := max(0, k+1-WindowRows)
		rows := sc[lo : k+1]
		f := fitRows(t, m, rows)
		inf := engine.Diagnose(f)
		fr, err := engine.Fragility(f, inf, conclusions(cps), engine.FragilityOptions{MaxRemoved: 3, Limit: 2})
		if err != nil {
			t.Fatal(err)
		}
		a := arrival{rows: rows, fit: f, inf: inf, frag: fr}
		// A windowed model judges an arriving row against the fit of the
		// window that includes it.
		last := len(rows) - 1
		a.verdict = engine.Judge(inf, engine.DefaultCutoffs())[last]
		a.full = inf.Rows[last]
		a.n = len(rows)
		if k+1 >= BaselineRows {
			// The drift is judged on the window's fit without the rows
			// the window judges suspect: a suspect reading has an alert
			// of its own and should not raise a second one.
			df := f
			var kept []Reading
			for i, v := range engine.Judge(inf, engine.DefaultCutoffs()) {
				if v.Word() != "suspect" {
					kept = append(kept, rows[i])
				}
			}
			if len(kept) < len(rows) {
				df = fitRows(t, m, kept)
			}
			for j, c := range df.Coef {
				a.drift = append(a.drift, driftMeasure{name: c.Term, baseline: base.Coef[j].Estimate, current: c.Estimate, se: base.Coef[j].StdError})
			}
			for _, cp := range cps {
				b, se := predictAt(t, base, cp.EmfMV)
				cur, _ := predictAt(t, df, cp.EmfMV)
				a.drift = append(a.drift, driftMeasure{name: cp.Name, baseline: b, current: cur, se: se})
			}
		}
		out[k] = a
	}
	return out
}

func (a arrival) String() string {
	if a.fit == nil {
		return "not judged"
	}
	o := a.full
	s := fmt.Sprintf("n=%d %-11s h=%.3f t=%6.2f D=%.3f dffits=%6.2f bonf=%.3g frag=%d %q", a.n, a.verdict.Word(), o.Leverage, o.StudentExternal, o.Cook, o.DFFITS, o.BonferroniP, a.frag.Index, a.frag.Conclusion)
	s += fmt.Sprintf(" window n=%d", a.fit.N)
	if a.drift != nil {
		s += " drift z:"
		for _, d := range a.drift {
			s += fmt.Sprintf(" %.1f", d.z())
		}
	}
	return s
}

// TestScenarioProof proves every planted outcome with the engine: for each
// reading, the fit of the rows the daemon holds when it arrives (the last
// WindowRows rows from MinRows on), judged with the engine's default
// cutoffs (absolute family: Cook's D above the median of F(p, n-p),
// |DFFITS| or |DFBETAS| above 1; outlier: Bonferroni p below 0.05), the
// fragility index under the config's conclusions (sign and significance
// of each non-intercept coefficient, the two checkpoints) and the drift
// rule (each coefficient and checkpoint prediction against the fit of the
// first BaselineRows rows, band DriftK baseline standard errors).
func TestScenarioProof(t *testing.T) {
	sc := Scenario()
	ar := replay(t, sc, Checkpoints)
	defer func() {
		if t.Failed() {
			for k, a := range ar {
				t.Logf("%2d %-13s T=%7.2f e=%7.4f %v", k, sc[k].Phase, sc[k].RefTempC, sc[k].EmfMV, a)
			}
		}
	}()
	out := Expected()
	fragile := false // the fragile-fit alert's state as the readings arrive
	drifted := false
	suspect := -1 // the suspect reading, once it has arrived
	for k, r := range sc {
		a := ar[k]
		if k+1 < MinRows {
			if a.fit != nil {
				t.Fatalf("reading %d judged before MinRows", k)
			}
			if r.Expect != ExpectNothing || r.Phase != PhaseOrdinary {
				t.Errorf("line %d: %s reading before the model is judged", r.Line(), r.Phase)
			}
			continue
		}
		v := a.verdict
		name := fmt.Sprintf("line %d (%s)", r.Line(), r.Phase)

		// The point verdicts.
		switch r.Expect {
		case ExpectOutlierOnly:
			if !v.Outlier || v.Influential {
				t.Errorf("%s: %s, want an outlier that is not influential", name, v.Word())
			}
		case ExpectSuspect:
			if v.Word() != "suspect" {
				t.Errorf("%s: %s, want suspect (outlier and influential)", name, v.Word())
			}
		default:
			if v.Outlier || v.Influential {
				t.Errorf("%s: %s, want neither outlier nor influential (flags %+v)", name, v.Word(), v.Flags)
			}
		}
		if r.Phase == PhaseLeverage {
			lim := engine.CutoffLimits(engine.DefaultCutoffs(), a.n, a.fit.P)
			if h := a.full.Leverage; !(h > 3*lim.Leverage/2) {
				t.Errorf("%s: leverage %.3f, want well above 2p/n = %.3f", name, h, lim.Leverage)
			}
		}

		// The suspect-point alert stays open: at every refresh after it
		// arrived, the suspect reading is judged suspect in the window.
		if r.Expect == ExpectSuspect {
			suspect = r.Index
		}
		if suspect >= 0 {
			w := engine.Judge(a.inf, engine.DefaultCutoffs())
			for i, wr := range a.rows {
				if wr.Index == suspect && w[i].Word() != "suspect" {
					t.Errorf("%s: the suspect reading on line %d is now %s in the window", name, wr.Line(), w[i].Word())
				}
			}
		}

		// The fragile-fit alert opens with the edge outlier and resolves
		// with the follow-up marked ExpectFragilityClears; at no other
		// time is the fit fragile.
		switch r.Expect {
		case ExpectSuspect:
			fragile = true
		case ExpectFragilityClears:
			fragile = false
		}
		if a.frag.Fragile != fragile {
			t.Errorf("%s: fragile %v (index %d, %s), want %v", name, a.frag.Fragile, a.frag.Index, a.frag.Conclusion, fragile)
		}
		if r.Expect == ExpectSuspect {
			// Removing the suspect row alone moves the lower checkpoint.
			removed := a.frag.RemovedRows
			if a.frag.Index != 1 || a.frag.Kind != "checkpoint" || len(removed) != 1 || a.rows[removed[0]-1].Index != r.Index {
				t.Errorf("%s: fragility %+v, want index 1 by removing this row", name, a.frag)
			}
		}

		// The drift alert opens with the reading marked ExpectDrift and
		// stays open.
		if r.Expect == ExpectDrift {
			drifted = true
		}
		if got := anyDrift(a.drift); got != drifted {
			t.Errorf("%s: drift out of band %v, want %v", name, got, drifted)
		}
		// Not by a hair: 5% of the band on either side of the opening.
		if z := maxZ(a.drift); r.Expect == ExpectDrift && z < 1.05*DriftK || !drifted && z > 0.95*DriftK {
			t.Errorf("%s: largest drift %.3f standard errors, too close to the band of %d", name, z, DriftK)
		}
	}
	if len(out.Suspect) != 1 || len(out.OutlierOnly) != 1 || out.FragileFrom == 0 || out.FragileUntil <= out.FragileFrom || out.Drift <= out.FragileUntil || out.Leverage == 0 {
		t.Errorf("outcomes %+v", out)
	}
}

// TestSuggestionPointsToTheFollowUps checks that when the suspect reading
// arrives, the engine's best suggestion (over the config's region) lies at
// the bottom edge, that readings there would end the fragility, and that
// the follow-up readings are taken near it.
func TestSuggestionPointsToTheFollowUps(t *testing.T) {
	sc := Scenario()
	ar := replay(t, sc, Checkpoints)
	var k int
	for i, r := range sc {
		if r.Expect == ExpectSuspect {
			k = i
		}
	}
	a := ar[k]
	v := engine.Judge(a.inf, engine.DefaultCutoffs())
	sg, err := engine.Suggest(a.fit, a.inf, v, engine.Region{Predictor: {RegionLow, RegionHigh}},
		engine.SuggestOptions{Replicates: 3, Top: 3, Conclusions: conclusions(Checkpoints), Fragility: engine.FragilityOptions{MaxRemoved: 3, Limit: 2}})
	if err != nil {
		t.Fatal(err)
	}
	if len(sg) == 0 {
		t.Fatal("no suggestion")
	}
	best := sg[0]
	at := best.At[Predictor]
	width := RegionHigh - RegionLow
	if at > RegionLow+0.05*width {
		t.Errorf("best suggestion at %s = %v, want the bottom edge of [%v, %v]: %s", Predictor, at, RegionLow, RegionHigh, best.Text)
	}
	if !best.Effect.FragileBefore || best.Effect.EndsFragility == 0 {
		t.Errorf("best suggestion does not end the fragility: %+v", best.Effect)
	}
	for _, r := range sc {
		if r.Phase == PhaseFollowUp && math.Abs(r.EmfMV-at) > 0.05*width {
			t.Errorf("follow-up on line %d at %s = %v, not near the suggestion %v", r.Line(), Predictor, r.EmfMV, at)
		}
	}
	t.Logf("suggestion when line %d arrives: %s", sc[k].Line(), best.Text)
}
