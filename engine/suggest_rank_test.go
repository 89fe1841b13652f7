package engine_test

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"plumb/engine"
)

// srAugmented refits f with r readings added at design row z, each on the
// fitted surface (the assumption Suggest documents).
func srAugmented(tb testing.TB, f *engine.Fit, z []float64, r int) *engine.Fit {
	tb.Helper()
	X, y := f.X(), f.Y()
	n, p := X.Dims()
	Xa := mat.NewDense(n+r, p, nil)
	Xa.Slice(0, n, 0, p).(*mat.Dense).Copy(X)
	ya := append(append([]float64(nil), y...), make([]float64, r)...)
	yhat, _ := f.Predict(z)
	for k := 0; k < r; k++ {
		Xa.SetRow(n+k, z)
		ya[n+k] = yhat
	}
	g, err := engine.Refit(f.Model, Xa, ya)
	if err != nil {
		tb.Fatal(err)
	}
	return g
}

// srBruteAfter is the fragility index of g (f with readings added) by
// refitting g without every set of up to maxM of the first n rows (the
// recorded ones), conclusions judged against g itself; 0 when none
// breaks. Independent of the engine's downdate.
func srBruteAfter(tb testing.TB, g *engine.Fit, n int, c engine.Conclusions, maxM int) int {
	tb.Helper()
	checks := frChecks(tb, g, c)
	for m := 1; m <= maxM && g.N-m > g.P; m++ {
		set := make([]int, m)
		for a := range set {
			set[a] = a
		}
		for {
			if h, err := frDrop(g, set); err == nil {
				for _, ch := range checks {
					if frBroken(g, h, ch) {
						return m
					}
				}
			}
			a := m - 1
			for a >= 0 && set[a] == n-m+a {
				a--
			}
			if a < 0 {
				break
			}
			set[a]++
			for b := a + 1; b < m; b++ {
				set[b] = set[b-1] + 1
			}
		}
	}
	return 0
}

// srEff maps a fragility index to how sturdy it is: none found up to
// maxM counts as maxM + 1.
func srEff(idx, maxM int) int {
	if idx == 0 {
		return maxM + 1
	}
	return idx
}

// srDesignRow is the design row of a suggestion.
func srDesignRow(tb testing.TB, f *engine.Fit, at map[string]float64) []float64 {
	tb.Helper()
	z := make([]float64, f.P)
	if err := f.Model.DesignRow(z, func(col string) float64 { return at[col] }); err != nil {
		tb.Fatal(err)
	}
	return z
}

// srCheckRanking checks a list of suggestions against brute-force refits:
// each reported index after the readings is the refits' index; none is
// below the index now; and no suggestion is listed above another that
// does more for the index (ends the fragility when it does not, or raises
// the index more).
func srCheckRanking(t *testing.T, f *engine.Fit, s []engine.Suggestion, c engine.Conclusions, maxM, limit int) {
	t.Helper()
	before := srBruteAfter(t, f, f.N, c, maxM)
	fragile := func(idx int) bool { return idx > 0 && idx <= limit }
	after := make([]int, len(s))
	for k, sg := range s {
		g := srAugmented(t, f, srDesignRow(t, f, sg.At), sg.Replicates)
		after[k] = srBruteAfter(t, g, f.N, c, maxM)
		if sg.Effect.FragilityAfter != after[k] || sg.Effect.FragilityBefore != before {
			t.Errorf("%d: index %d -> %d reported, brute force %d -> %d: %s", k, sg.Effect.FragilityBefore, sg.Effect.FragilityAfter, before, after[k], sg.Text)
		}
		if gain := srEff(after[k], maxM) - srEff(before, maxM); gain < 0 || gain != sg.Effect.IndexGain {
			t.Errorf("%d: index gain %d reported, brute force %d (listed although it lowers the index?): %s", k, sg.Effect.IndexGain, gain, sg.Text)
		}
	}
	for a := range s {
		for b := a + 1; b < len(s); b++ {
			endsA := fragile(before) && !fragile(after[a])
			endsB := fragile(before) && !fragile(after[b])
			if endsB && !endsA {
				t.Errorf("%d ends the fragility but is listed below %d, which does not:\n  %s\n  %s", b, a, s[a].Text, s[b].Text)
			}
			if endsA == endsB && srEff(after[b], maxM) > srEff(after[a], maxM) {
				t.Errorf("%d raises the index to %d but is listed below %d (to %d):\n  %s\n  %s", b, after[b], a, after[a], s[a].Text, s[b].Text)
			}
		}
	}
}

// TestSuggestRankingProperty: over random fragile fits (seeded: lines
// and quadratics of 8 to 14 rows with a weak effect, so that one or two
// rows carry the sign or the significance of a coefficient), no listed
// suggestion stands above one that does more for the fragility index,
// none lowers it, and each reported index after the readings is that of
// a refit of the data with the readings added (brute force over every
// removal set of up to 3 recorded rows).
func TestSuggestRankingProperty(t *testing.T) {
	const maxM, limit = 3, 2
	c := engine.DefaultConclusions()
	rng := rand.New(rand.NewPCG(14, 4))
	fits, listed, pairs := 0, 0, 0
	for try := 0; fits < 30 && try < 5000; try++ {
		terms := []string{"x"}
		if rng.IntN(2) == 1 {
			terms = []string{"x", "x^2"}
		}
		m, err := engine.NewModel("y", terms, true)
		if err != nil {
			t.Fatal(err)
		}
		n := 8 + rng.IntN(7)
		x, y := make([]float64, n), make([]float64, n)
		b1, b2 := rng.NormFloat64()*0.3, rng.NormFloat64()*0.05
		for i := range x {
			x[i] = math.Round(rng.Float64()*200) / 10
			y[i] = 2 + b1*x[i] + b2*x[i]*x[i] + rng.NormFloat64()*2
		}
		X, yy, err := m.Design(map[string][]float64{"x": x, "y": y})
		if err != nil {
			t.Fatal(err)
		}
		f, err := engine.Refit(m, X, yy)
		if err != nil {
			continue
		}
		fr, err := engine.Fragility(f, nil, c, engine.FragilityOptions{MaxRemoved: maxM, Limit: limit})
		if err != nil {
			t.Fatal(err)
		}
		if !fr.Fragile {
			continue
		}
		fits++
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, v := range x {
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		region := engine.Region{"x": {lo - 5, hi + 5}}
		s, err := engine.Suggest(f, nil, nil, region, engine.SuggestOptions{
			Conclusions: c, Fragility: engine.FragilityOptions{MaxRemoved: maxM, Limit: limit}, Top: 4, Grid: 81,
		})
		if err != nil {
			t.Fatal(err)
		}
		listed += len(s)
		pairs += len(s) * (len(s) - 1) / 2
		t.Run("", func(t *testing.T) { srCheckRanking(t, f, s, c, maxM, limit) })
	}
	if fits < 30 {
		t.Fatalf("only %d fragile fits generated", fits)
	}
	t.Logf("%d fragile fits, %d suggestions listed, %d ordered pairs checked", fits, listed, pairs)
	if pairs == 0 {
		t.Error("no pair of suggestions to compare: the property was not exercised")
	}
}

// TestSuggestOvenThermocouple: an invented oven thermocouple calibration
// (emf_mv on oven_c and oven_c^2, readings between 50 and 325 degC, the
// operating region 0-400 degC). The fit is fragile: 2 rows carry the
// significance of the quadratic term. Three readings at 0 degC would
// lower the index to 1 and three at 400 degC raise it to 3 (brute-force
// refits below). The earlier ranking listed 0 first; now the point at 400
// is first and a point that lowers the index is not listed at all.
func TestSuggestOvenThermocouple(t *testing.T) {
	m, err := engine.NewModel("emf_mv", []string{"oven_c", "oven_c^2"}, true)
	if err != nil {
		t.Fatal(err)
	}
	x := []float64{100, 250, 250, 50, 300, 50, 75, 275, 250, 225, 325, 250, 200}
	y := []float64{4.101, 10.265, 10.256, 1.996, 12.359, 2.029, 3.074, 11.265, 10.253, 9.226, 13.379, 10.271, 8.198}
	X, yy, err := m.Design(map[string][]float64{"oven_c": x, "emf_mv": y})
	if err != nil {
		t.Fatal(err)
	}
	f, err := engine.Refit(m, X, yy)
	if err != nil {
		t.Fatal(err)
	}
	c := engine.DefaultConclusions()
	region := engine.Region{"oven_c": {0, 400}}
	s, err := engine.Suggest(f, nil, nil, region, engine.SuggestOptions{Conclusions: c})
	if err != nil {
		t.Fatal(err)
	}
	for _, sg := range s {
		t.Log(sg.Text)
	}
	if len(s) == 0 {
		t.Fatal("no suggestion")
	}
	// The independent check of the two points of the report.
	if got := srBruteAfter(t, f, f.N, c, 3); got != 2 {
		t.Fatalf("fragility index now %d by refits, want 2", got)
	}
	at0 := srBruteAfter(t, srAugmented(t, f, []float64{1, 0, 0}, 3), f.N, c, 3)
	at400 := srBruteAfter(t, srAugmented(t, f, []float64{1, 400, 160000}, 3), f.N, c, 3)
	if at0 != 1 || at400 != 3 {
		t.Fatalf("refits: 3 readings at 0 give index %d, at 400 give %d; the case wants 1 and 3", at0, at400)
	}
	top := s[0]
	if top.At["oven_c"] != 400 || top.Effect.FragileAfter || top.Effect.FragilityAfter != 3 || top.Kind != engine.SuggestCoverage {
		t.Errorf("top suggestion %v (kind %s, index after %d): want 400 degC, ending the fragility", top.At, top.Kind, top.Effect.FragilityAfter)
	}
	for _, sg := range s {
		if sg.At["oven_c"] < 100 {
			t.Errorf("a point near 0 degC is listed although readings there lower the index: %s", sg.Text)
		}
	}
	srCheckRanking(t, f, s, c, 3, 2)
	// Asked about 0 degC alone, Suggest offers nothing: readings there
	// would make the fit more fragile.
	s0, err := engine.Suggest(f, nil, nil, engine.Region{"oven_c": {0, 0}}, engine.SuggestOptions{Conclusions: c})
	if err != nil {
		t.Fatal(err)
	}
	if len(s0) != 0 {
		t.Errorf("at 0 degC: %d suggestions, want none: %s", len(s0), s0[0].Text)
	}
}

// srBadLine is a line on x = 5, 10, ..., 95 (y = 1 + 0.5 x plus seeded
// noise of SD 0.3) with one more reading at x = bad whose y is 25 off
// the line.
func srBadLine(tb testing.TB, bad float64) (*engine.Fit, map[string][]float64, []engine.Verdict) {
	tb.Helper()
	rng := rand.New(rand.NewPCG(5, 95))
	var x, y []float64
	for v := 5.0; v <= 95; v += 5 {
		x = append(x, v)
		y = append(y, 1+0.5*v+rng.NormFloat64()*0.3)
	}
	x = append(x, bad)
	y = append(y, 1+0.5*bad+25)
	m, err := engine.NewModel("y", []string{"x"}, true)
	if err != nil {
		tb.Fatal(err)
	}
	cols := map[string][]float64{"x": x, "y": y}
	f := frFit(tb, m, cols)
	_, v := engine.Assess(f, engine.DefaultCutoffs())
	if v[len(x)-1].Word() != "suspect" {
		tb.Fatalf("the reading at %v is %q, want suspect", bad, v[len(x)-1].Word())
	}
	return f, cols, v
}

// TestSuggestRegionExcludesSuspect: one bad reading at 150 on a line
// read over 5-95 no longer widens the default region: it stays 5-95
// (RegionExcludingSuspect), and every suggestion lies in it, whether
// the columns are given (Data) or recovered from the design.
func TestSuggestRegionExcludesSuspect(t *testing.T) {
	f, cols, v := srBadLine(t, 150)
	reg, err := engine.RegionExcludingSuspect(f.Model, cols, v)
	if err != nil {
		t.Fatal(err)
	}
	if reg["x"] != [2]float64{5, 95} {
		t.Errorf("region %v, want x in [5, 95]", reg)
	}
	all, _ := engine.RegionOf(f.Model, cols)
	if all["x"] != [2]float64{5, 150} {
		t.Errorf("observed region %v, want [5, 150]", all)
	}
	for _, tc := range []struct {
		name string
		data map[string][]float64
	}{{"recovered", nil}, {"given", cols}} {
		t.Run(tc.name, func(t *testing.T) {
			s, err := engine.Suggest(f, nil, v, nil, engine.SuggestOptions{Data: tc.data})
			if err != nil {
				t.Fatal(err)
			}
			if len(s) == 0 {
				t.Fatal("no suggestion")
			}
			for _, sg := range s {
				if x := sg.At["x"]; x < 5 || x > 95 {
					t.Errorf("suggestion at x = %v, outside 5-95: %s", x, sg.Text)
				}
				if sg.Kind != engine.SuggestCoverage {
					t.Errorf("kind %q at x = %v: the suspect reading at 150 is outside the region", sg.Kind, sg.At["x"])
				}
			}
		})
	}
	// Every row suspect: the range of all rows.
	allSuspect := make([]engine.Verdict, len(v))
	for i := range allSuspect {
		allSuspect[i] = engine.Verdict{Outlier: true, Influential: true}
	}
	if reg, err := engine.RegionExcludingSuspect(f.Model, cols, allSuspect); err != nil || reg["x"] != [2]float64{5, 150} {
		t.Errorf("all suspect: region %v, %v; want [5, 150]", reg, err)
	}
	if _, err := engine.RegionExcludingSuspect(f.Model, map[string][]float64{"y": cols["y"]}, v); err == nil {
		t.Error("missing column: no error")
	}
}

// TestSuggestRemeasure: a suggestion at the setting of a reading judged
// suspect is typed SuggestRemeasure, names the row and reads "re-measure
// near ..."; one elsewhere is coverage. The suspect reading is at x = 95,
// the end of the region where the D-optimal readings go.
func TestSuggestRemeasure(t *testing.T) {
	f, cols, v := srBadLine(t, 95)
	s, err := engine.Suggest(f, nil, v, engine.Region{"x": {5, 95}}, engine.SuggestOptions{Data: cols, Criterion: engine.CriterionDOptimal})
	if err != nil {
		t.Fatal(err)
	}
	suspectRow := len(cols["x"]) // 1-based: the last row
	remeasured := false
	for _, sg := range s {
		t.Log(sg.Kind, ": ", sg.Text)
		near := math.Abs(sg.At["x"]-95)/90 <= engine.DefaultNear
		switch {
		case near && (sg.Kind != engine.SuggestRemeasure || len(sg.Suspect) != 1 || sg.Suspect[0] != suspectRow ||
			!strings.HasPrefix(sg.Text, "re-measure near x = ") || !strings.Contains(sg.Text, "row "+itoa(suspectRow)+" was judged suspect")):
			t.Errorf("at x = %v, next to the suspect reading: kind %q, rows %v, text %q", sg.At["x"], sg.Kind, sg.Suspect, sg.Text)
		case !near && (sg.Kind != engine.SuggestCoverage || sg.Suspect != nil || !strings.HasPrefix(sg.Text, "add ")):
			t.Errorf("at x = %v: kind %q, rows %v, text %q", sg.At["x"], sg.Kind, sg.Suspect, sg.Text)
		}
		remeasured = remeasured || near
	}
	if !remeasured {
		t.Error("no suggestion at the suspect reading's setting; the case does not exercise the re-measurement")
	}
}

// TestSuggestRemeasureEdges: a region of zero width does not make every
// suspect reading "near" (only one at that very value is), and a verdict
// list shorter than the fit is taken as the rest not suspect.
func TestSuggestRemeasureEdges(t *testing.T) {
	f, cols, v := srBadLine(t, 95)
	for _, tc := range []struct {
		at   float64
		kind string
	}{{50, engine.SuggestCoverage}, {95, engine.SuggestRemeasure}} {
		s, err := engine.Suggest(f, nil, v, engine.Region{"x": {tc.at, tc.at}}, engine.SuggestOptions{Data: cols, Top: 1})
		if err != nil {
			t.Fatal(err)
		}
		if len(s) != 1 || s[0].Kind != tc.kind {
			t.Errorf("region x = %v: %+v, want one suggestion of kind %s", tc.at, s, tc.kind)
		}
	}
	if _, err := engine.Suggest(f, nil, v[:3], nil, engine.SuggestOptions{Data: cols}); err != nil {
		t.Errorf("short verdict list: %v", err)
	}
}
