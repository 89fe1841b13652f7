package engine_test

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"plumb/engine"
)

// sgLineFit fits y on the given terms of x, with y from a fixed smooth
// function plus seeded noise (the D criterion does not depend on y).
func sgLineFit(tb testing.TB, terms []string, xs []float64) *engine.Fit {
	tb.Helper()
	m, err := engine.NewModel("y", terms, true)
	if err != nil {
		tb.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(uint64(len(xs)), 9))
	y := make([]float64, len(xs))
	for i, x := range xs {
		y[i] = 1 + 2*x + 0.5*x*x + rng.NormFloat64()*0.1
	}
	return frFit(tb, m, map[string][]float64{"x": xs, "y": y})
}

var sgUnit = engine.Region{"x": {-1, 1}}

func sgD(tb testing.TB, f *engine.Fit, region engine.Region) engine.Suggestion {
	tb.Helper()
	// Fragility up to one removed row keeps these loops fast; the D
	// ranking does not depend on it.
	s, err := engine.Suggest(f, nil, nil, region, engine.SuggestOptions{Criterion: engine.CriterionDOptimal, Top: 1, Replicates: 1,
		Fragility: engine.FragilityOptions{MaxRemoved: 1}})
	if err != nil {
		tb.Fatal(err)
	}
	if len(s) != 1 {
		tb.Fatalf("%d suggestions", len(s))
	}
	return s[0]
}

// TestSuggestEquivalenceTheorem: at a D-optimal design the largest
// n·d(x) over the region equals p (Kiefer & Wolfowitz 1959, Canad. J.
// Math. 12:363; CHECKS.md A5): {-1, 1} for a line gives 2 = p;
// {-1, 0, 1} for a line gives 2.5 > p; {-1, 0, 1} for a quadratic gives
// 3 = p (Atkinson, Donev & Tobias, Optimum Experimental Designs, ch. 9,
// from memory). Designs are replicated so that n > p.
func TestSuggestEquivalenceTheorem(t *testing.T) {
	tests := []struct {
		name  string
		terms []string
		xs    []float64
		want  float64
		argm  []float64 // where the maximum is attained
	}{
		{"line on {-1,1}", []string{"x"}, []float64{-1, -1, 1, 1}, 2, []float64{-1, 1}},
		{"line on {-1,0,1}", []string{"x"}, []float64{-1, 0, 1, -1, 0, 1}, 2.5, []float64{-1, 1}},
		{"quadratic on {-1,0,1}", []string{"x", "x^2"}, []float64{-1, 0, 1, -1, 0, 1}, 3, []float64{-1, 0, 1}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			f := sgLineFit(t, tc.terms, tc.xs)
			s := sgD(t, f, sgUnit)
			if got := float64(f.N) * s.D; math.Abs(got-tc.want) > 1e-12 {
				t.Errorf("max n·d(x) = %.15g, want %v", got, tc.want)
			}
			in := false
			for _, v := range tc.argm {
				in = in || math.Abs(s.At["x"]-v) < 1e-12
			}
			if !in {
				t.Errorf("argmax at x = %v, want one of %v", s.At["x"], tc.argm)
			}
			if math.Abs(s.DGain-(1+s.D)) > 1e-15 {
				t.Errorf("DGain %v, D %v", s.DGain, s.D)
			}
		})
	}
}

// TestSuggestSequentialD: the sequential D-optimal rule (add argmax d(x);
// Wynn 1970, Ann. Math. Stat. 41:1655) started from a poor design takes
// only the ends of [-1, 1] for a straight line, and for a quadratic only
// points near {-1, 0, 1} (the centre pick moves with the asymmetry of
// the start) in near-equal shares: the D-optimal support (Atkinson, Donev
// & Tobias ch. 9-11, from memory); max n·d(x) converges to p.
func TestSuggestSequentialD(t *testing.T) {
	tests := []struct {
		name    string
		terms   []string
		support []float64
		near    float64 // picks after the first few lie this close
	}{
		{"line", []string{"x"}, []float64{-1, 1}, 0},
		{"quadratic", []string{"x", "x^2"}, []float64{-1, 0, 1}, 0.05},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			xs := []float64{-0.3, -0.1, 0.05, 0.2, 0.4}
			count := map[float64]int{}
			const steps = 90
			var last float64
			for k := 0; k < steps; k++ {
				f := sgLineFit(t, tc.terms, xs)
				s := sgD(t, f, sgUnit)
				x := s.At["x"]
				in := false
				for _, v := range tc.support {
					if math.Abs(x-v) <= tc.near {
						in = true
						count[v]++
					}
				}
				if !in && k >= len(tc.support) {
					t.Errorf("step %d: picked x = %v, not within %v of the support %v", k, x, tc.near, tc.support)
				}
				xs = append(xs, x)
				last = float64(f.N) * s.D
			}
			p := float64(len(tc.terms) + 1)
			if last < p || last > p*1.08 {
				t.Errorf("max n·d(x) = %.4f after %d steps, want to approach p = %v from above", last, steps, p)
			}
			for _, v := range tc.support {
				share := float64(count[v]) / steps
				if math.Abs(share-1/float64(len(tc.support))) > 0.05 {
					t.Errorf("share at %v = %.3f, want about 1/%d (counts %v)", v, share, len(tc.support), count)
				}
			}
		})
	}
}

// TestSuggestDeliveryD: values of CHECKS.md A5 for the delivery data:
// d at (30, 1460) = 0.49829 = h9 (Montgomery, Peck & Vining Table 6.1),
// at (30, 36) = 2.2079, the best corner, at (2, 1460) = 2.2018.
func TestSuggestDeliveryD(t *testing.T) {
	f := frDeliveryFit(t)
	at := func(c, d float64) engine.Suggestion {
		return sgD(t, f, engine.Region{"cases": {c, c}, "distance": {d, d}})
	}
	for _, tc := range []struct{ c, d, want float64 }{{30, 1460, 0.49829}, {30, 36, 2.2079}, {2, 1460, 2.2018}} {
		if got := at(tc.c, tc.d).D; math.Abs(got-tc.want) > 5e-5 {
			t.Errorf("d(%v, %v) = %.5f, want %.5f", tc.c, tc.d, got, tc.want)
		}
	}
	region, err := engine.ObservedRegion(f)
	if err != nil {
		t.Fatal(err)
	}
	if region["cases"] != [2]float64{2, 30} || region["distance"] != [2]float64{36, 1460} {
		t.Errorf("observed region %v", region)
	}
	best := sgD(t, f, region)
	if best.At["cases"] != 30 || best.At["distance"] != 36 || math.Abs(best.D-2.2079) > 5e-5 {
		t.Errorf("best point %v, d = %.5f; want (30, 36), 2.2079", best.At, best.D)
	}
}

// TestSuggestReplicateLeverage: r readings exactly at a row with leverage
// h leave it h/(1 + r h). Derivation: with u = C x_i and d = x_i'u = h,
// Sherman-Morrison for X'X + r x_i x_i' gives h_new = h - r h²/(1 + r h)
// = h/(1 + r h). Checked against Diagnose on a refit of the data with the
// r readings added on the fitted surface (oracle: engine.Refit +
// engine.Diagnose), for leverage and Cook's distance of row 9 of the
// delivery data.
func TestSuggestReplicateLeverage(t *testing.T) {
	f := frDeliveryFit(t)
	inf := engine.Diagnose(f)
	h := inf.Rows[8].Leverage
	for r := 1; r <= 6; r++ {
		s, err := engine.Suggest(f, inf, nil, engine.Region{"cases": {30, 30}, "distance": {1460, 1460}},
			engine.SuggestOptions{Replicates: r, Top: 1})
		if err != nil {
			t.Fatal(err)
		}
		var re *engine.RowEffect
		for k := range s[0].Effect.Rows {
			if s[0].Effect.Rows[k].Row == 9 {
				re = &s[0].Effect.Rows[k]
			}
		}
		if re == nil {
			t.Fatalf("row 9 not watched: %+v", s[0].Effect.Rows)
		}
		if want := h / (1 + float64(r)*h); math.Abs(re.LeverageAfter-want) > 1e-12 {
			t.Errorf("r = %d: leverage %.15g, closed form %.15g", r, re.LeverageAfter, want)
		}
		// Refit with r readings at (30, 1460) on the fitted surface.
		X, y := f.X(), f.Y()
		n, p := X.Dims()
		Xa := mat.NewDense(n+r, p, nil)
		Xa.Slice(0, n, 0, p).(*mat.Dense).Copy(X)
		ya := append(append([]float64(nil), y...), make([]float64, r)...)
		yhat, _ := f.Predict([]float64{1, 30, 1460})
		for k := 0; k < r; k++ {
			Xa.SetRow(n+k, []float64{1, 30, 1460})
			ya[n+k] = yhat
		}
		g, err := engine.Refit(f.Model, Xa, ya)
		if err != nil {
			t.Fatal(err)
		}
		o := engine.Diagnose(g).Rows[8]
		if e := frRel(re.LeverageAfter, o.Leverage); e > 1e-9 {
			t.Errorf("r = %d: leverage %.15g, refit %.15g", r, re.LeverageAfter, o.Leverage)
		}
		if e := frRel(re.CookAfter, o.Cook); e > 1e-9 {
			t.Errorf("r = %d: Cook %.15g, refit %.15g", r, re.CookAfter, o.Cook)
		}
		if e := frRel(s[0].Effect.DetRatio, 1+float64(r)*h); e > 1e-12 {
			t.Errorf("r = %d: det ratio %.15g, want 1 + r h = %.15g", r, s[0].Effect.DetRatio, 1+float64(r)*h)
		}
	}
}

// TestSuggestEqualLeverage: a 2x2 factorial replicated five times has
// h = p/n = 0.15 for every row (Hoaglin & Welsch 1978: mean leverage p/n),
// so no row is flagged by leverage; with residuals of equal size (the
// a·b pattern, orthogonal to the model) none is influential, and Suggest
// then ranks by D and watches the three rows of highest leverage.
func TestSuggestEqualLeverage(t *testing.T) {
	m, _ := engine.NewModel("y", []string{"a", "b"}, true)
	var a, b, y []float64
	for rep := 0; rep < 5; rep++ {
		for _, ab := range [][2]float64{{-1, -1}, {-1, 1}, {1, -1}, {1, 1}} {
			a, b = append(a, ab[0]), append(b, ab[1])
			y = append(y, 6+2*ab[0]+ab[1]+0.3*ab[0]*ab[1])
		}
	}
	f := frFit(t, m, map[string][]float64{"a": a, "b": b, "y": y})
	inf := engine.Diagnose(f)
	v := engine.Judge(inf, engine.DefaultCutoffs())
	for i, o := range inf.Rows {
		if math.Abs(o.Leverage-3.0/20) > 1e-12 {
			t.Errorf("row %d: h = %v, want p/n = 0.15", i+1, o.Leverage)
		}
		if v[i].Influential {
			t.Fatalf("row %d influential: %+v", i+1, v[i])
		}
		for _, fl := range v[i].Flags {
			if fl.Measure == engine.MeasureLeverage {
				t.Errorf("row %d flagged by leverage", i+1)
			}
		}
	}
	s, err := engine.Suggest(f, inf, v, nil, engine.SuggestOptions{})
	if err != nil {
		t.Fatal(err)
	}
	// d(x) = (1 + a² + b²)/20 is largest, 3/20, at the four corners.
	if len(s) != 3 {
		t.Fatalf("%d suggestions", len(s))
	}
	for _, sg := range s {
		if math.Abs(sg.D-3.0/20) > 1e-12 || math.Abs(sg.At["a"]) != 1 || math.Abs(sg.At["b"]) != 1 {
			t.Errorf("suggestion %v, d = %v; want a corner, 3/20", sg.At, sg.D)
		}
		if len(sg.Effect.Rows) != 3 {
			t.Errorf("watched %d rows, want the 3 of highest leverage", len(sg.Effect.Rows))
		}
	}
}

// TestSuggestDelivery: with the influential observation 9 (Montgomery,
// Peck & Vining Ex. 6.1-6.3), the influence criterion puts readings
// where its pull falls most, the text says so in the predictors' units,
// the label names the row, and the reported fragility after the readings
// agrees with a brute-force search on a refit of the augmented data
// (oracle: engine.Refit).
func TestSuggestDelivery(t *testing.T) {
	f := frDeliveryFit(t)
	c := engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "distance", K: 1}}}
	// The observed region (row 9, judged suspect, included; the default
	// region leaves it out: TestSuggestRegionExcludesSuspect).
	region, err := engine.ObservedRegion(f)
	if err != nil {
		t.Fatal(err)
	}
	s, err := engine.Suggest(f, nil, nil, region, engine.SuggestOptions{
		Conclusions: c,
		Label:       func(row int) string { return "line " + itoa(row+1) + " of delivery.csv" },
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(s) == 0 {
		t.Fatal("no suggestion")
	}
	top := s[0]
	t.Logf("%s", top.Text)
	for _, sg := range s[1:] {
		t.Logf("%s", sg.Text)
	}
	// Row 9 (line 10) is judged suspect, and the best point is its own
	// setting: a re-measurement, not new coverage.
	if top.Kind != engine.SuggestRemeasure || len(top.Suspect) != 1 || top.Suspect[0] != 9 ||
		!strings.HasPrefix(top.Text, "re-measure near cases = 30, distance = 1460 with 3 readings, where line 10 of delivery.csv was judged suspect") {
		t.Errorf("kind %q, suspect rows %v, text %q", top.Kind, top.Suspect, top.Text)
	}
	for _, sg := range s[1:] {
		if sg.Kind != engine.SuggestCoverage || !strings.HasPrefix(sg.Text, "add 3 readings near cases = ") {
			t.Errorf("kind %q, text %q", sg.Kind, sg.Text)
		}
	}
	if top.Effect.FragilityBefore != 1 || !top.Effect.FragileBefore {
		t.Errorf("fragility before %d, want 1 (row 9 alone moves distance by > 1 SE)", top.Effect.FragilityBefore)
	}
	var row9 *engine.RowEffect
	for k := range top.Effect.Rows {
		if top.Effect.Rows[k].Row == 9 {
			row9 = &top.Effect.Rows[k]
		}
	}
	if row9 == nil || !(row9.CookAfter < row9.CookBefore/2) {
		t.Errorf("row 9 effect %+v: want Cook's distance at least halved", row9)
	}
	// Distinct regions.
	for a := range s {
		for b := a + 1; b < len(s); b++ {
			dc := (s[a].At["cases"] - s[b].At["cases"]) / 28
			dd := (s[a].At["distance"] - s[b].At["distance"]) / 1424
			if math.Hypot(dc, dd) < 0.25 {
				t.Errorf("suggestions %v and %v are closer than 0.25", s[a].At, s[b].At)
			}
		}
	}
	// Brute force on the augmented data: refit with r readings at the
	// point on the fitted surface and remove every set of up to 3 of the
	// original rows; the band keeps its full-data centre and width.
	brute := func(z []float64, r int) int {
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
			t.Fatal(err)
		}
		half := 1 * f.Coef[2].StdError
		for m := 1; m <= 3; m++ {
			set := make([]int, m)
			for a := range set {
				set[a] = a
			}
			for {
				h, err := frDrop(g, set)
				if err == nil && math.Abs(h.Coef[2].Estimate-f.Coef[2].Estimate) > half {
					return m
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
	fragile := func(idx int) bool { return idx > 0 && idx <= 2 }
	for _, sg := range s {
		z := []float64{1, sg.At["cases"], sg.At["distance"]}
		if idx := brute(z, sg.Replicates); sg.Effect.FragilityAfter != idx {
			t.Errorf("at %v: fragility after %d, brute force %d", sg.At, sg.Effect.FragilityAfter, idx)
		}
		// The smallest number of readings that ends the fragility.
		switch e := sg.Effect.EndsFragility; {
		case e > 0:
			if fragile(brute(z, e)) {
				t.Errorf("at %v: %d readings said to end the fragility; brute force: still fragile", sg.At, e)
			}
			if e > 1 && !fragile(brute(z, e-1)) {
				t.Errorf("at %v: %d readings said to be the fewest; brute force: %d suffice", sg.At, e, e-1)
			}
		default:
			if !fragile(brute(z, 20)) {
				t.Errorf("at %v: said not ended by 20 readings; brute force: it is", sg.At)
			}
		}
	}
}

// TestSuggestSpaceFilling: beyond three columns the candidates are a
// shifted Halton set plus the corners; the D criterion for a first-order
// model in four factors picks corners (d is largest at the vertices of
// the cube, since d is convex in x).
func TestSuggestSpaceFilling(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	names := []string{"a", "b", "c", "e"}
	cols := map[string][]float64{"y": make([]float64, 40)}
	for _, nm := range names {
		v := make([]float64, 40)
		for i := range v {
			v[i] = rng.Float64()*2 - 1
		}
		cols[nm] = v
	}
	for i := range cols["y"] {
		cols["y"][i] = cols["a"][i] - cols["e"][i] + rng.NormFloat64()
	}
	m, _ := engine.NewModel("y", names, true)
	f := frFit(t, m, cols)
	region := engine.Region{"a": {-1, 1}, "b": {-1, 1}, "c": {-1, 1}, "e": {-1, 1}}
	s1, err := engine.Suggest(f, nil, nil, region, engine.SuggestOptions{Criterion: engine.CriterionDOptimal, Seed: 42})
	if err != nil {
		t.Fatal(err)
	}
	s2, _ := engine.Suggest(f, nil, nil, region, engine.SuggestOptions{Criterion: engine.CriterionDOptimal, Seed: 42})
	for k := range s1 {
		if s1[k].Text != s2[k].Text {
			t.Errorf("same seed, different suggestions: %q vs %q", s1[k].Text, s2[k].Text)
		}
		for _, nm := range names {
			if math.Abs(s1[k].At[nm]) != 1 {
				t.Errorf("suggestion %v is not a corner", s1[k].At)
			}
		}
	}
}

// TestSuggestPredictorSpace: for y ~ log(x) the candidates are values of
// x, not of log x, and the region must be positive.
func TestSuggestPredictorSpace(t *testing.T) {
	m, _ := engine.NewModel("y", []string{"log(x)"}, true)
	f := frFit(t, m, map[string][]float64{"x": {1, 2, 3, 5, 8, 13}, "y": {0.1, 0.8, 1.0, 1.7, 2.0, 2.6}})
	region, err := engine.ObservedRegion(f)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(region["x"][0]-1) > 1e-12 || math.Abs(region["x"][1]-13) > 1e-12 {
		t.Errorf("observed region %v, want [1, 13]", region)
	}
	s := sgD(t, f, engine.Region{"x": {-5, 20}})
	// log x is most extreme at the low end of the positive part: 20 has
	// log 3.0, points near 0 have log -> -inf; the grid's smallest
	// positive value wins.
	if s.At["x"] <= 0 || s.At["x"] > 0.2 {
		t.Errorf("picked x = %v", s.At["x"])
	}
}

func TestSuggestErrors(t *testing.T) {
	f := frDeliveryFit(t)
	tests := []struct {
		name   string
		region engine.Region
		col    string
	}{
		{"missing column", engine.Region{"cases": {2, 30}}, "distance"},
		{"reversed", engine.Region{"cases": {30, 2}, "distance": {36, 1460}}, "cases"},
		{"infinite", engine.Region{"cases": {2, math.Inf(1)}, "distance": {36, 1460}}, "cases"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := engine.Suggest(f, nil, nil, tc.region, engine.SuggestOptions{})
			var re *engine.RegionError
			if !errors.Is(err, engine.ErrRegion) || !errors.As(err, &re) || re.Column != tc.col {
				t.Errorf("err = %v, want a RegionError for %q", err, tc.col)
			}
		})
	}
	m, _ := engine.NewModel("y", []string{"x^2"}, true)
	g := frFit(t, m, map[string][]float64{"x": {-2, -1, 0, 1, 2, 3}, "y": {4, 1, 0, 1, 4, 9.5}})
	if _, err := engine.ObservedRegion(g); !errors.Is(err, engine.ErrRegion) {
		t.Errorf("x^2 only: err = %v, want ErrRegion (the sign of x is lost)", err)
	}
	if _, err := engine.Suggest(f, nil, nil, nil, engine.SuggestOptions{Conclusions: engine.Conclusions{Terms: []string{"nope"}, Signs: true}}); !errors.Is(err, engine.ErrConclusion) {
		t.Errorf("err = %v, want ErrConclusion", err)
	}
	reg, err := engine.RegionOf(f.Model, map[string][]float64{"cases": {3, 9, math.NaN()}, "distance": {5, 1}})
	if err != nil || reg["cases"] != [2]float64{3, 9} || reg["distance"] != [2]float64{1, 5} {
		t.Errorf("RegionOf = %v, %v", reg, err)
	}
}

// Where to take readings for the delivery-time data (Montgomery, Peck &
// Vining, Table 3.2), within the observed ranges of cases and distance.
func ExampleSuggest() {
	m, _ := engine.NewModel("time", []string{"cases", "distance"}, true)
	X, y, _ := m.Design(map[string][]float64{
		"time": frDelivery.time, "cases": frDelivery.cases, "distance": frDelivery.distance,
	})
	f, _ := engine.Refit(m, X, y)
	s, _ := engine.Suggest(f, nil, nil, nil, engine.SuggestOptions{Top: 1,
		Conclusions: engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "distance", K: 1}}}})
	fmt.Println(s[0].Kind + ": " + s[0].Text)
	// Row 9 (cases 30, distance 1460) is judged suspect, so the default
	// region is the range of the other rows.
	// Output:
	// coverage: add 3 readings near cases = 18.2, distance = 810 (det(X'X) x 1.36): leverage of row 9 falls 0.5 -> 0.39, Cook's distance 3.4 -> 2; leverage of row 22 falls 0.39 -> 0.33, Cook's distance 0.45 -> 0.35; fragility index rises 1 -> 2; up to 20 readings here do not end the fragility
}

// TestSuggestBefore: passing the caller's Fragility result gives the same
// suggestions as letting Suggest search the current fit itself.
func TestSuggestBefore(t *testing.T) {
	f := frDeliveryFit(t)
	c := engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "distance", K: 1}}}
	fr, err := engine.Fragility(f, nil, c, engine.FragilityOptions{})
	if err != nil {
		t.Fatal(err)
	}
	a, err := engine.Suggest(f, nil, nil, nil, engine.SuggestOptions{Conclusions: c})
	if err != nil {
		t.Fatal(err)
	}
	b, err := engine.Suggest(f, nil, nil, nil, engine.SuggestOptions{Conclusions: c, Before: &fr})
	if err != nil {
		t.Fatal(err)
	}
	if len(a) != len(b) {
		t.Fatalf("%d vs %d suggestions", len(a), len(b))
	}
	for k := range a {
		if a[k].Text != b[k].Text || a[k].Effect.FragilityBefore != fr.Index {
			t.Errorf("%q vs %q (index %d)", a[k].Text, b[k].Text, fr.Index)
		}
	}
}
