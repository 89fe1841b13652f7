package engine_test

import (
	"bufio"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"plumb/engine"
)

// frDelivery is the delivery-time data: Montgomery, Peck & Vining,
// Introduction to Linear Regression Analysis (5th ed.), Table 3.2
// (y = time in minutes, x1 = cases, x2 = distance in feet), n = 25; also
// in the Rdatasets collection as robustbase/delivery. The fit it gives is
// checked against CHECKS.md A2 in TestFragilityDeliveryFit.
var frDelivery = struct{ time, cases, distance []float64 }{
	time: []float64{16.68, 11.50, 12.03, 14.88, 13.75, 18.11, 8.00, 17.83, 79.24, 21.50,
		40.33, 21.00, 13.50, 19.75, 24.00, 29.00, 15.35, 19.00, 9.50, 35.10,
		17.90, 52.32, 18.75, 19.83, 10.75},
	cases: []float64{7, 3, 3, 4, 6, 7, 2, 7, 30, 5, 16, 10, 4, 6, 9, 10, 6, 7, 3, 17,
		10, 26, 9, 8, 4},
	distance: []float64{560, 220, 340, 80, 150, 330, 110, 210, 1460, 605, 688, 215, 255, 462, 448,
		776, 200, 132, 36, 770, 140, 810, 450, 635, 150},
}

func frDeliveryFit(tb testing.TB) *engine.Fit {
	tb.Helper()
	m, err := engine.NewModel("time", []string{"cases", "distance"}, true)
	if err != nil {
		tb.Fatal(err)
	}
	return frFit(tb, m, map[string][]float64{
		"time": frDelivery.time, "cases": frDelivery.cases, "distance": frDelivery.distance,
	})
}

func frFit(tb testing.TB, m engine.Model, cols map[string][]float64) *engine.Fit {
	tb.Helper()
	X, y, err := m.Design(cols)
	if err != nil {
		tb.Fatal(err)
	}
	f, err := engine.Refit(m, X, y)
	if err != nil {
		tb.Fatal(err)
	}
	return f
}

// frReadCSV reads a numeric CSV written by testdata/fragility/gen.sh
// (first line a comment naming the source, then a quoted header).
func frReadCSV(tb testing.TB, name string) map[string][]float64 {
	tb.Helper()
	fh, err := os.Open(filepath.Join("testdata", "fragility", name))
	if err != nil {
		tb.Fatal(err)
	}
	defer fh.Close()
	sc := bufio.NewScanner(fh)
	var header []string
	cols := map[string][]float64{}
	for sc.Scan() {
		line := sc.Text()
		if strings.HasPrefix(line, "#") || line == "" {
			continue
		}
		fields := strings.Split(line, ",")
		if header == nil {
			for _, h := range fields {
				header = append(header, strings.Trim(h, `"`))
			}
			continue
		}
		for k, fv := range fields {
			v, err := strconv.ParseFloat(fv, 64)
			if err != nil {
				tb.Fatalf("%s: %v", name, err)
			}
			cols[header[k]] = append(cols[header[k]], v)
		}
	}
	if err := sc.Err(); err != nil {
		tb.Fatal(err)
	}
	return cols
}

func frRel(got, want float64) float64 {
	if got == want {
		return 0
	}
	return math.Abs(got-want) / math.Max(math.Abs(want), 1e-300)
}

// frCheck is one conclusion for the brute-force oracle.
type frCheck struct {
	text  string
	kind  string
	j     int
	half  float64
	x0    []float64
	alpha float64
}

// frChecks lists the conclusions of c for f in the documented order,
// independently of the engine's compiler.
func frChecks(tb testing.TB, f *engine.Fit, c engine.Conclusions) []frCheck {
	tb.Helper()
	alpha := c.Alpha
	if alpha == 0 {
		alpha = 0.05
	}
	if !c.Signs && !c.Significance && len(c.Coefficients) == 0 && len(c.Checkpoints) == 0 {
		c.Signs, c.Significance = true, true
	}
	names := f.Model.Names()
	var sel []int
	for j, nm := range names {
		if len(c.Terms) == 0 && nm != engine.InterceptName {
			sel = append(sel, j)
		}
		for _, t := range c.Terms {
			if t == nm {
				sel = append(sel, j)
			}
		}
	}
	var out []frCheck
	if c.Signs {
		for _, j := range sel {
			out = append(out, frCheck{text: "sign of " + names[j], kind: "sign", j: j})
		}
	}
	if c.Significance {
		for _, j := range sel {
			out = append(out, frCheck{text: fmt.Sprintf("significance of %s at %v", names[j], alpha), kind: "significance", j: j, alpha: alpha})
		}
	}
	for _, b := range c.Coefficients {
		for j, nm := range names {
			if nm == b.Term {
				out = append(out, frCheck{text: fmt.Sprintf("%s within %v SE", nm, b.K), kind: "band", j: j, half: b.K * f.Coef[j].StdError})
			}
		}
	}
	for _, cp := range c.Checkpoints {
		x0 := make([]float64, f.P)
		if err := f.Model.DesignRow(x0, func(col string) float64 { return cp.At[col] }); err != nil {
			tb.Fatal(err)
		}
		out = append(out, frCheck{kind: "checkpoint", j: -1, half: cp.Tolerance, x0: x0})
	}
	return out
}

// frValue is the reported value of check ch in fit g.
func frValue(g *engine.Fit, ch frCheck) float64 {
	switch ch.kind {
	case "significance":
		return g.Coef[ch.j].P
	case "checkpoint":
		y, _ := g.Predict(ch.x0)
		return y
	}
	return g.Coef[ch.j].Estimate
}

// frBroken reports whether fit g breaks ch relative to the full fit f.
func frBroken(f, g *engine.Fit, ch frCheck) bool {
	switch ch.kind {
	case "sign":
		// Zero within 1e-9 SE (rounding) counts as a lost sign, as
		// documented in fragility.go.
		after, before, zero := g.Coef[ch.j].Estimate, f.Coef[ch.j].Estimate, 1e-9*f.Coef[ch.j].StdError
		if math.Abs(before) <= zero {
			return false // no sign to lose
		}
		return math.Signbit(after) != math.Signbit(before) || math.Abs(after) <= zero
	case "significance":
		return (g.Coef[ch.j].P < ch.alpha) != (f.Coef[ch.j].P < ch.alpha)
	default:
		// Beyond the width by more than rounding (1e-9 relative), as
		// documented in fragility.go.
		return math.Abs(frValue(g, ch)-frValue(f, ch)) > ch.half*(1+1e-9)
	}
}

// frDrop refits f without the 0-based rows in set (a plain full refit).
func frDrop(f *engine.Fit, set []int) (*engine.Fit, error) {
	X, y := f.X(), f.Y()
	n, p := X.Dims()
	drop := map[int]bool{}
	for _, i := range set {
		drop[i] = true
	}
	Xs := mat.NewDense(n-len(set), p, nil)
	ys := make([]float64, 0, n-len(set))
	k := 0
	for i := 0; i < n; i++ {
		if drop[i] {
			continue
		}
		Xs.SetRow(k, X.RawRowView(i))
		ys = append(ys, y[i])
		k++
	}
	return engine.Refit(f.Model, Xs, ys)
}

// frBrute finds the fragility index by refitting every subset of up to
// maxM rows, in lexicographic order; it returns the index (0: none), the
// first breaking set (0-based) and the number of subsets that could not
// be refitted.
func frBrute(tb testing.TB, f *engine.Fit, checks []frCheck, maxM int) (int, []int, int) {
	tb.Helper()
	skipped := 0
	n := f.N
	for m := 1; m <= maxM && n-m > f.P; m++ {
		set := make([]int, m)
		for a := range set {
			set[a] = a
		}
		for {
			g, err := frDrop(f, set)
			if err != nil {
				skipped++
			} else {
				for _, ch := range checks {
					if frBroken(f, g, ch) {
						return m, append([]int(nil), set...), skipped
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
	return 0, nil, skipped
}

// frCompare checks Fragility against the brute-force refits.
func frCompare(t *testing.T, f *engine.Fit, c engine.Conclusions, maxM int) engine.FragilityResult {
	t.Helper()
	got, err := engine.Fragility(f, nil, c, engine.FragilityOptions{MaxRemoved: maxM})
	if err != nil {
		t.Fatal(err)
	}
	checks := frChecks(t, f, c)
	idx, set, _ := frBrute(t, f, checks, maxM)
	if got.Index != idx {
		t.Fatalf("index %d (rows %v, %s), brute force %d (rows %v)", got.Index, got.RemovedRows, got.Conclusion, idx, set)
	}
	if got.Searched != "exhaustive" {
		t.Errorf("Searched = %q, want exhaustive", got.Searched)
	}
	if got.Fragile != (idx > 0 && idx <= 2) {
		t.Errorf("Fragile = %v with index %d", got.Fragile, idx)
	}
	if idx == 0 {
		if got.RemovedRows != nil || got.Conclusion != "" {
			t.Errorf("no index but rows %v, conclusion %q", got.RemovedRows, got.Conclusion)
		}
		return got
	}
	want := make([]int, len(set))
	for a, i := range set {
		want[a] = i + 1
	}
	if !reflect.DeepEqual(got.RemovedRows, want) {
		t.Errorf("removed rows %v, first breaking set by brute force %v", got.RemovedRows, want)
	}
	// The reported set breaks the reported conclusion, with the reported
	// values, in a plain refit.
	rows := make([]int, len(got.RemovedRows))
	for a, r := range got.RemovedRows {
		rows[a] = r - 1
	}
	g, err := frDrop(f, rows)
	if err != nil {
		t.Fatalf("refit without %v: %v", got.RemovedRows, err)
	}
	var ch *frCheck
	for k := range checks {
		if checks[k].kind == got.Kind && (checks[k].kind == "checkpoint" || f.Coef[checks[k].j].Term == got.Term) {
			ch = &checks[k]
			break
		}
	}
	if ch == nil {
		t.Fatalf("reported conclusion %q (%s %s) is not among the conclusions", got.Conclusion, got.Kind, got.Term)
	}
	if !frBroken(f, g, *ch) {
		t.Errorf("refit without %v does not break %q", got.RemovedRows, got.Conclusion)
	}
	if e := frRel(got.Before, frValue(f, *ch)); e > 1e-9 {
		t.Errorf("%s: before %.15g, full fit %.15g (rel %.2g)", got.Conclusion, got.Before, frValue(f, *ch), e)
	}
	if e := frRel(got.After, frValue(g, *ch)); e > 1e-9 {
		t.Errorf("%s: after %.15g, refit %.15g (rel %.2g)", got.Conclusion, got.After, frValue(g, *ch), e)
	}
	return got
}

// TestFragilityDeliveryFit: the typed delivery data reproduce the fit and
// hat value of CHECKS.md A2 (Montgomery, Peck & Vining Ex. 3.1, 6.1).
func TestFragilityDeliveryFit(t *testing.T) {
	f := frDeliveryFit(t)
	for j, want := range []float64{2.34123, 1.61591, 0.014385} {
		if e := frRel(f.Coef[j].Estimate, want); e > 5e-5 {
			t.Errorf("b%d = %.6g, want %.6g (CHECKS.md A2)", j, f.Coef[j].Estimate, want)
		}
	}
	if e := frRel(f.RSS, 233.732); e > 5e-6 {
		t.Errorf("SSE = %.6f, want 233.732 (CHECKS.md A2)", f.RSS)
	}
	if h := f.Leverage([]float64{1, 30, 1460}); math.Abs(h-0.49829) > 5e-6 {
		t.Errorf("h9 = %.6f, want 0.49829 (CHECKS.md A2)", h)
	}
}

// TestFragilityBruteForce compares the index, the reported set and its
// before/after values with plain refits of every subset of up to three
// rows (oracle: engine.Refit on the reduced data).
func TestFragilityBruteForce(t *testing.T) {
	delivery := frDeliveryFit(t)
	carsCols := frReadCSV(t, "cars.csv") // R datasets::cars (Ezekiel 1930)
	carsModel, _ := engine.NewModel("dist", []string{"speed"}, true)
	cars := frFit(t, carsModel, carsCols)
	womenCols := frReadCSV(t, "women.csv") // R datasets::women (McNeil 1977)
	womenModel, _ := engine.NewModel("weight", []string{"height", "height^2"}, true)
	women := frFit(t, womenModel, womenCols)

	cases := []struct {
		name string
		f    *engine.Fit
		c    engine.Conclusions
	}{
		{"delivery/defaults", delivery, engine.Conclusions{}},
		{"delivery/bands", delivery, engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "cases", K: 1}, {Term: "distance", K: 2}}}},
		{"delivery/checkpoint", delivery, engine.Conclusions{Checkpoints: []engine.Checkpoint{{At: map[string]float64{"cases": 10, "distance": 500}, Tolerance: 0.6}}}},
		{"delivery/all", delivery, engine.Conclusions{Signs: true, Significance: true, Alpha: 0.001,
			Coefficients: []engine.CoefBand{{Term: "intercept", K: 1.5}},
			Checkpoints:  []engine.Checkpoint{{Name: "far corner", At: map[string]float64{"cases": 30, "distance": 36}, Tolerance: 2}}}},
		{"cars/defaults", cars, engine.Conclusions{}},
		{"cars/band", cars, engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "speed", K: 0.4}}}},
		{"cars/checkpoint", cars, engine.Conclusions{Checkpoints: []engine.Checkpoint{{At: map[string]float64{"speed": 25}, Tolerance: 4}}}},
		{"women/defaults", women, engine.Conclusions{}},
		{"women/intercept-sign", women, engine.Conclusions{Signs: true, Terms: []string{"intercept", "height"}}},
		{"women/band", women, engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "height^2", K: 0.7}}}},
	}
	// Generated data (n <= 30) with weak effects, so that removals of one,
	// two or three rows flip conclusions in a fair share of them.
	rng := rand.New(rand.NewPCG(7, 11))
	for k := 0; k < 24; k++ {
		n := 8 + rng.IntN(23)
		x1, x2, y := make([]float64, n), make([]float64, n), make([]float64, n)
		b1, b2 := 0.3+rng.Float64(), rng.NormFloat64()*0.3
		for i := range y {
			x1[i] = rng.Float64() * 10
			x2[i] = rng.NormFloat64()
			y[i] = 1 + b1*x1[i]/5 + b2*x2[i] + rng.NormFloat64()*1.5
		}
		if k%5 == 0 { // one high-leverage row
			x1[0], y[0] = 25, 1+b1*7+rng.NormFloat64()
		}
		terms := []string{"x1", "x2"}
		if k%3 == 1 {
			terms = []string{"x1"}
		}
		m, _ := engine.NewModel("y", terms, true)
		f := frFit(t, m, map[string][]float64{"x1": x1, "x2": x2, "y": y})
		c := engine.Conclusions{}
		if k%4 == 3 {
			c = engine.Conclusions{Signs: true, Checkpoints: []engine.Checkpoint{{At: map[string]float64{"x1": 5, "x2": 0}, Tolerance: 0.5}}}
		}
		cases = append(cases, struct {
			name string
			f    *engine.Fit
			c    engine.Conclusions
		}{fmt.Sprintf("generated/%d/n=%d", k, n), f, c})
	}
	seen := map[int]int{}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			got := frCompare(t, tc.f, tc.c, 3)
			seen[got.Index]++
		})
	}
	// The cases must exercise every outcome, or the comparison proves
	// little.
	for idx := 0; idx <= 3; idx++ {
		if seen[idx] == 0 {
			t.Errorf("no case with index %d (seen %v)", idx, seen)
		}
	}
}

// TestFragilityTopCandidates forces the ranked search with a small budget
// and checks that it says so, and that a set it reports really breaks the
// conclusion (oracle: engine.Refit on the reduced data).
func TestFragilityTopCandidates(t *testing.T) {
	f := frDeliveryFit(t)
	c := engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "distance", K: 1.2}}}
	full, err := engine.Fragility(f, nil, c, engine.FragilityOptions{})
	if err != nil {
		t.Fatal(err)
	}
	// Budget 100: m = 1 exhaustive (25 subsets), then C(L, 2) <= 75 with
	// at most 10 candidates gives L = 10.
	got, err := engine.Fragility(f, nil, c, engine.FragilityOptions{Budget: 100, Candidates: 10})
	if err != nil {
		t.Fatal(err)
	}
	if len(got.Steps) == 0 || !got.Steps[0].Exhaustive {
		t.Fatalf("steps %+v", got.Steps)
	}
	if full.Index != 2 || got.Index != 2 {
		t.Fatalf("index %d exhaustive, %d ranked; want 2 for both", full.Index, got.Index)
	}
	{
		if got.Steps[1].Exhaustive || got.Steps[1].Candidates != 10 || got.Searched != "exhaustive for 1 removed, top 10 candidates for 2" {
			t.Errorf("Searched %q, steps %+v", got.Searched, got.Steps)
		}
	}
	if got.Index != 0 {
		if got.Index < full.Index {
			t.Errorf("ranked search found index %d below exhaustive %d", got.Index, full.Index)
		}
		rows := make([]int, len(got.RemovedRows))
		for a, r := range got.RemovedRows {
			rows[a] = r - 1
		}
		g, err := frDrop(f, rows)
		if err != nil {
			t.Fatal(err)
		}
		if d := math.Abs(g.Coef[2].Estimate - f.Coef[2].Estimate); d <= 1.2*f.Coef[2].StdError {
			t.Errorf("rows %v move distance by %.3g SE only", got.RemovedRows, d/f.Coef[2].StdError)
		}
		if e := frRel(got.After, g.Coef[2].Estimate); e > 1e-9 {
			t.Errorf("after %.15g, refit %.15g", got.After, g.Coef[2].Estimate)
		}
	}
	t.Logf("exhaustive: %d %v %s; ranked: %d %v %s (%s)", full.Index, full.RemovedRows, full.Conclusion, got.Index, got.RemovedRows, got.Conclusion, got.Searched)
}

// TestFragilityDelivery: removing observation 9 of the delivery data (the
// point Montgomery, Peck & Vining Ex. 6.1-6.3 single out, D = 3.42) moves
// the distance coefficient by more than one standard error; the exact
// downdate agrees with a plain refit without it.
func TestFragilityDelivery(t *testing.T) {
	f := frDeliveryFit(t)
	got, err := engine.Fragility(f, nil, engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "distance", K: 1}}}, engine.FragilityOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if got.Index != 1 || !reflect.DeepEqual(got.RemovedRows, []int{9}) || got.Conclusion != "distance within 1 SE" {
		t.Fatalf("got %+v", got)
	}
	g, err := frDrop(f, []int{8})
	if err != nil {
		t.Fatal(err)
	}
	if e := frRel(got.After, g.Coef[2].Estimate); e > 1e-9 {
		t.Errorf("after %.15g, refit %.15g", got.After, g.Coef[2].Estimate)
	}
}

func TestFragilityConclusionErrors(t *testing.T) {
	f := frDeliveryFit(t)
	tests := []struct {
		name string
		c    engine.Conclusions
		text string
	}{
		{"unknown band term", engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "weight", K: 1}}}, "weight within 1 SE"},
		{"zero K", engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "cases", K: 0}}}, "cases within 0 SE"},
		{"alpha", engine.Conclusions{Alpha: 1.5}, "significance"},
		{"unknown term", engine.Conclusions{Signs: true, Terms: []string{"nope"}}, "sign of nope"},
		{"checkpoint column", engine.Conclusions{Checkpoints: []engine.Checkpoint{{At: map[string]float64{"cases": 3}, Tolerance: 1}}}, "prediction at cases=3 within 1"},
		{"checkpoint tolerance", engine.Conclusions{Checkpoints: []engine.Checkpoint{{Name: "p", At: map[string]float64{"cases": 3, "distance": 1}, Tolerance: -1}}}, "prediction at p within -1"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := engine.Fragility(f, nil, tc.c, engine.FragilityOptions{})
			if !errors.Is(err, engine.ErrConclusion) {
				t.Fatalf("err = %v, want ErrConclusion", err)
			}
			var ce *engine.ConclusionError
			if !errors.As(err, &ce) || ce.Conclusion != tc.text {
				t.Errorf("err = %#v, want conclusion %q", err, tc.text)
			}
		})
	}
	// A checkpoint outside a term's domain carries the *DataError.
	m, _ := engine.NewModel("y", []string{"log(x)"}, true)
	g := frFit(t, m, map[string][]float64{"x": {1, 2, 3, 4, 5}, "y": {1, 3, 2, 5, 4}})
	_, err := engine.Fragility(g, nil, engine.Conclusions{Checkpoints: []engine.Checkpoint{{At: map[string]float64{"x": -1}, Tolerance: 1}}}, engine.FragilityOptions{})
	if !errors.Is(err, engine.ErrConclusion) || !errors.Is(err, engine.ErrLogDomain) {
		t.Errorf("err = %v, want ErrConclusion and ErrLogDomain", err)
	}
}

// TestFragilitySkipsSingular: removing the only row away from x = 0 of a
// straight line leaves a constant column; that subset is skipped, not
// reported (the reduced fit does not exist).
func TestFragilitySkipsSingular(t *testing.T) {
	m, _ := engine.NewModel("y", []string{"x"}, true)
	f := frFit(t, m, map[string][]float64{"x": {0, 0, 0, 0, 0, 1}, "y": {1, 1.2, 0.9, 1.1, 1, 3}})
	got, err := engine.Fragility(f, nil, engine.Conclusions{Signs: true}, engine.FragilityOptions{MaxRemoved: 2})
	if err != nil {
		t.Fatal(err)
	}
	if got.Skipped == 0 {
		t.Errorf("no subset skipped: %+v", got)
	}
	if got.Index != 0 {
		t.Errorf("index %d with rows %v: removing zero-residual duplicates cannot flip the slope", got.Index, got.RemovedRows)
	}
	// Brute force agrees that every refit of a removable set either
	// fails or keeps the sign.
	checks := frChecks(t, f, engine.Conclusions{Signs: true})
	idx, _, skipped := frBrute(t, f, checks, 2)
	if idx != 0 || skipped != got.Skipped {
		t.Errorf("brute force index %d, %d refits failed; Fragility skipped %d", idx, skipped, got.Skipped)
	}
}

// The delivery-time data (Montgomery, Peck & Vining, Table 3.2): with
// observation 9 removed, the distance coefficient moves by more than one
// standard error.
func ExampleFragility() {
	m, _ := engine.NewModel("time", []string{"cases", "distance"}, true)
	X, y, _ := m.Design(map[string][]float64{
		"time": frDelivery.time, "cases": frDelivery.cases, "distance": frDelivery.distance,
	})
	f, _ := engine.Refit(m, X, y)
	c := engine.DefaultConclusions()
	c.Coefficients = []engine.CoefBand{{Term: "distance", K: 1}}
	res, _ := engine.Fragility(f, nil, c, engine.FragilityOptions{})
	fmt.Printf("index %d (%s): removing rows %v breaks %q: %.5f -> %.5f; fragile: %v\n",
		res.Index, res.Searched, res.RemovedRows, res.Conclusion, res.Before, res.After, res.Fragile)
	// Output:
	// index 1 (exhaustive): removing rows [9] breaks "distance within 1 SE": 0.01438 -> 0.01032; fragile: true
}

// TestFragilityR compares with brute force by plain refits in R
// (testdata/fragility/brute.csv, written by gen_brute.R with Debian's
// r-base-core: lm.fit on every subset of up to 3 removed rows): index,
// first breaking set, conclusion, and before/after values to 1e-9.
func TestFragilityR(t *testing.T) {
	delivery := frDeliveryFit(t)
	carsModel, _ := engine.NewModel("dist", []string{"speed"}, true)
	cars := frFit(t, carsModel, frReadCSV(t, "cars.csv"))
	womenModel, _ := engine.NewModel("weight", []string{"height", "height^2"}, true)
	women := frFit(t, womenModel, frReadCSV(t, "women.csv"))
	cases := map[string]struct {
		f *engine.Fit
		c engine.Conclusions
	}{
		"delivery/defaults":   {delivery, engine.Conclusions{}},
		"delivery/bands":      {delivery, engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "cases", K: 1}, {Term: "distance", K: 2}}}},
		"delivery/checkpoint": {delivery, engine.Conclusions{Checkpoints: []engine.Checkpoint{{At: map[string]float64{"cases": 10, "distance": 500}, Tolerance: 0.6}}}},
		"cars/defaults":       {cars, engine.Conclusions{}},
		"cars/band":           {cars, engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "speed", K: 0.4}}}},
		"cars/checkpoint":     {cars, engine.Conclusions{Checkpoints: []engine.Checkpoint{{At: map[string]float64{"speed": 25}, Tolerance: 4}}}},
		"women/defaults":      {women, engine.Conclusions{}},
		"women/band":          {women, engine.Conclusions{Coefficients: []engine.CoefBand{{Term: "height^2", K: 0.7}}}},
	}
	raw, err := os.ReadFile(filepath.Join("testdata", "fragility", "brute.csv"))
	if err != nil {
		t.Fatal(err)
	}
	seen := 0
	for _, line := range strings.Split(strings.TrimSpace(string(raw)), "\n") {
		if strings.HasPrefix(line, "#") || strings.HasPrefix(line, "case,") {
			continue
		}
		fs := strings.Split(line, ",")
		if len(fs) != 7 {
			t.Fatalf("bad line %q", line)
		}
		tc, ok := cases[fs[0]]
		if !ok {
			t.Fatalf("unknown case %q", fs[0])
		}
		seen++
		t.Run(fs[0], func(t *testing.T) {
			got, err := engine.Fragility(tc.f, nil, tc.c, engine.FragilityOptions{})
			if err != nil {
				t.Fatal(err)
			}
			idx, _ := strconv.Atoi(fs[1])
			if got.Index != idx {
				t.Fatalf("index %d (%v %s), R %d (%s)", got.Index, got.RemovedRows, got.Conclusion, idx, fs[2])
			}
			if idx == 0 {
				return
			}
			var rows []int
			for _, r := range strings.Fields(fs[2]) {
				v, _ := strconv.Atoi(r)
				rows = append(rows, v)
			}
			if !reflect.DeepEqual(got.RemovedRows, rows) || got.Kind != fs[3] || got.Term != fs[4] {
				t.Errorf("rows %v, %s %q; R rows %v, %s %q", got.RemovedRows, got.Kind, got.Term, rows, fs[3], fs[4])
			}
			before, _ := strconv.ParseFloat(fs[5], 64)
			after, _ := strconv.ParseFloat(fs[6], 64)
			if e := frRel(got.Before, before); e > 1e-9 {
				t.Errorf("before %.17g, R %.17g", got.Before, before)
			}
			if e := frRel(got.After, after); e > 1e-9 {
				t.Errorf("after %.17g, R %.17g", got.After, after)
			}
		})
	}
	if seen != len(cases) {
		t.Errorf("%d cases in brute.csv, want %d", seen, len(cases))
	}
}

// TestFragilityEdgeData: exact fits, a row with leverage 1 and the fewest
// rows a fit allows give results, not panics or NaN conclusions.
func TestFragilityEdgeData(t *testing.T) {
	m, _ := engine.NewModel("y", []string{"x"}, true)
	tests := []struct {
		name string
		x, y []float64
	}{
		{"exact line", []float64{1, 2, 3, 4, 5, 6}, []float64{3, 5, 7, 9, 11, 13}},
		{"leverage 1", []float64{0, 0, 0, 0, 1}, []float64{1, 2, 1.5, 1.2, 4}},
		{"n = p + 1", []float64{1, 2, 4}, []float64{1, 2.5, 3}},
		// Removing the last row leaves a constant response, which Refit
		// refuses: that subset is skipped, not a lost sign.
		{"constant response left", []float64{1, 2, 3, 4, 5, 6, 7}, []float64{2, 2, 2, 2, 2, 2, 7}},
		{"zero response left", []float64{1, 2, 3, 4, 5, 6, 7}, []float64{0, 0, 0, 0, 0, 1, 3}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			f := frFit(t, m, map[string][]float64{"x": tc.x, "y": tc.y})
			got, err := engine.Fragility(f, nil, engine.Conclusions{Signs: true, Significance: true,
				Checkpoints: []engine.Checkpoint{{At: map[string]float64{"x": 2}, Tolerance: 0.5}}}, engine.FragilityOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if got.Index > 0 && (math.IsNaN(got.After) || math.IsNaN(got.Before)) {
				t.Errorf("NaN values: %+v", got)
			}
			checks := frChecks(t, f, engine.Conclusions{Signs: true, Significance: true,
				Checkpoints: []engine.Checkpoint{{At: map[string]float64{"x": 2}, Tolerance: 0.5}}})
			idx, _, skipped := frBrute(t, f, checks, 3)
			if idx != got.Index {
				t.Errorf("index %d (%+v), brute force %d", got.Index, got, idx)
			}
			if idx == 0 && skipped != got.Skipped {
				t.Errorf("skipped %d subsets, brute force could not refit %d", got.Skipped, skipped)
			}
			if _, err := engine.Suggest(f, nil, nil, nil, engine.SuggestOptions{}); err != nil {
				t.Errorf("Suggest: %v", err)
			}
		})
	}
}

// FuzzFragility: any data that fits gives a fragility result whose
// reported set breaks its conclusion in a plain refit (oracle:
// engine.Refit), and suggestions without a panic.
func FuzzFragility(f *testing.F) {
	f.Add([]byte{10, 200, 30, 40, 50, 60, 70, 80, 90, 100, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10})
	f.Add([]byte{0, 0, 0, 0, 255, 1, 1, 1, 1, 3, 9, 9, 9})
	f.Fuzz(func(t *testing.T, data []byte) {
		n := len(data) / 2
		if n < 4 || n > 20 {
			return
		}
		x, y := make([]float64, n), make([]float64, n)
		for i := 0; i < n; i++ {
			x[i] = float64(data[i]) / 16
			y[i] = float64(data[n+i]) / 16
		}
		m, _ := engine.NewModel("y", []string{"x"}, true)
		X, yy, err := m.Design(map[string][]float64{"x": x, "y": y})
		if err != nil {
			return
		}
		fit, err := engine.Refit(m, X, yy)
		if err != nil {
			return
		}
		c := engine.Conclusions{Signs: true, Significance: true, Checkpoints: []engine.Checkpoint{{At: map[string]float64{"x": 4}, Tolerance: 1}}}
		res, err := engine.Fragility(fit, nil, c, engine.FragilityOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if res.Index > 0 {
			rows := make([]int, len(res.RemovedRows))
			for a, r := range res.RemovedRows {
				rows[a] = r - 1
			}
			g, err := frDrop(fit, rows)
			if err != nil {
				t.Fatalf("reported set %v has no refit: %v", res.RemovedRows, err)
			}
			for _, ch := range frChecks(t, fit, c) {
				if ch.kind == res.Kind && (ch.kind == "checkpoint" || fit.Coef[ch.j].Term == res.Term) {
					if !frBroken(fit, g, ch) {
						t.Errorf("%v does not break %q in a refit", res.RemovedRows, res.Conclusion)
					}
				}
			}
		}
		if _, err := engine.Suggest(fit, nil, nil, nil, engine.SuggestOptions{Fragility: engine.FragilityOptions{MaxRemoved: 2}}); err != nil {
			t.Fatal(err)
		}
	})
}
