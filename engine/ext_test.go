package engine

import (
	"errors"
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"runtime"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestDerivations: a term is derived from other columns exactly when each
// of its factors is also a term of its own to the first power.
func TestDerivations(t *testing.T) {
	m, err := NewModel("y", []string{"x", "x^2", "x^9*x", "log(q)", "log(q)^2", "x*log(q)", "x*z", "z^2", "q^2"}, true)
	if err != nil {
		t.Fatal(err)
	}
	der := derivations(m)
	want := map[string]string{
		"x^2": "1^2", "x^9*x": "1^10", "log(q)^2": "4^2", "x*log(q)": "1^1 4^1",
	}
	for j, name := range m.Names() {
		got := ""
		if d := der[j]; d != nil {
			var parts []string
			for k := range d.col {
				parts = append(parts, fmt.Sprintf("%d^%d", d.col[k], d.pow[k]))
			}
			got = strings.Join(parts, " ")
		}
		if got != want[name] {
			t.Errorf("%s: derived %q, want %q", name, got, want[name])
		}
	}
}

// TestDerivedFallback: when a design column is not the rounded product
// of its factors (a design the caller built or changed), that column is
// taken as given and the other derived columns stay exact: the fit then
// matches the exact oracle on that design, on both routes.
func TestDerivedFallback(t *testing.T) {
	for k, tc := range []illCase{illCases[4], illCases[2]} { // quadratic (binary64), quartic (extended)
		rng := rand.New(rand.NewPCG(uint64(70+k), 17))
		cols := tc.cols(rng)
		m, err := NewModel("y", tc.terms, true)
		if err != nil {
			t.Fatal(err)
		}
		X, y, err := m.Design(cols)
		if err != nil {
			t.Fatal(err)
		}
		X.Set(3, 2, X.At(3, 2)*(1+1e-9)) // x^2 of row 3 no longer x·x
		f, err := Refit(m, X, y)
		if err != nil {
			t.Fatal(err)
		}
		if f.lo != nil && f.lo[2] != nil {
			t.Fatalf("%s: the changed column is still taken as derived", tc.name)
		}
		xr := exactDesign(t, m, cols)
		for i := range xr {
			xr[i][2].SetFloat64(X.At(i, 2))
		}
		ex := exactInfluenceRat(xr, floatsRat(y))
		b, rss, obs := ex.b, ex.rss, ex.obs
		for j := range b {
			if e := relErr(f.Coef[j].Estimate, b[j]); e > 1e-9 {
				t.Errorf("%s: b%d rel err %.1e against the design as given", tc.name, j, e)
			}
		}
		if e := relErr(f.RSS, rss); e > 1e-9 {
			t.Errorf("%s: RSS rel err %.1e", tc.name, e)
		}
		for i, o := range Diagnose(f).Rows {
			if e := relErr(o.Leverage, obs[i].h); e > 1e-9 {
				t.Errorf("%s: row %d h rel err %.1e", tc.name, i, e)
			}
			if e := relErr(o.Residual, obs[i].e); e > 1e-9 {
				t.Errorf("%s: row %d residual rel err %.1e", tc.name, i, e)
			}
		}
	}
}

// TestRefusalAbovePromise: above a scaled condition number of 1e10 the fit
// is refused with ErrIllConditioned, the condition number (mat.Condition)
// and the terms involved, and not refused just below it.
func TestRefusalAbovePromise(t *testing.T) {
	for _, tc := range []struct {
		name  string
		delta float64
		terms []string // named in the error; nil: the fit must succeed
	}{
		{"collinear 1e11", 6e-11, []string{"x1", "x4"}},
		{"collinear 1e9", 6e-9, nil},
	} {
		m, X, y := conditionedProblem(t, 6, 200, 5, tc.delta)
		f, err := Refit(m, X, y)
		if tc.terms == nil {
			if err != nil {
				t.Errorf("%s: %v", tc.name, err)
			} else if f.Condition < 1e8 || f.Condition > maxCondition {
				t.Errorf("%s: condition %.3g", tc.name, f.Condition)
			}
			continue
		}
		var c mat.Condition
		if !errors.Is(err, ErrIllConditioned) || !errors.As(err, &c) || float64(c) <= maxCondition {
			t.Fatalf("%s: want ErrIllConditioned with a condition above 1e10, got %v", tc.name, err)
		}
		msg := err.Error()
		for _, term := range tc.terms {
			if !strings.Contains(msg, term) {
				t.Errorf("%s: error %q does not name %s", tc.name, msg, term)
			}
		}
		if strings.Contains(msg, "x2") || strings.Contains(msg, "x3") {
			t.Errorf("%s: error %q names a term not involved", tc.name, msg)
		}
		t.Logf("%s: %v", tc.name, err)
	}
	// Degree 10 on x in 4..10: condition 1.1e10.
	m, err := NewModel("y", polyTerms(10), true)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(7, 7))
	x, yv := make([]float64, 40), make([]float64, 40)
	for i := range x {
		x[i] = 4 + 6*rng.Float64()
		yv[i] = rng.NormFloat64()
	}
	X, y, err := m.Design(map[string][]float64{"x": x, "y": yv})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Refit(m, X, y); !errors.Is(err, ErrIllConditioned) || !strings.Contains(err.Error(), "x^5") {
		t.Errorf("degree 10 on 4..10: want ErrIllConditioned naming the powers, got %v", err)
	}
}

// TestExtendedLarge: the extended route over several chunks of rows, in
// parallel, agrees with the exact oracle to 1e-9 in every row's
// diagnostics and gives the same values, bit for bit, on one goroutine.
func TestExtendedLarge(t *testing.T) {
	if testing.Short() {
		t.Skip("exact oracle on 5,000 rows")
	}
	m, X, y := conditionedProblem(t, 8, 5000, 3, 6e-8)
	fit := func(procs int) (*Fit, *Influence) {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		f, err := Refit(m, X, y)
		if err != nil {
			t.Fatal(err)
		}
		return f, Diagnose(f)
	}
	f, inf := fit(2)
	if f.ext == nil || newChunking(5000, 3).nc < 2 {
		t.Fatalf("not the extended route over several chunks (condition %.3g)", f.Condition)
	}
	f1, inf1 := fit(1)
	for j := range f.Coef {
		if f.Coef[j] != f1.Coef[j] {
			t.Errorf("coefficient %d differs between 1 and 2 goroutines", j)
		}
	}
	for i := range inf.Rows {
		if inf.Rows[i] != inf1.Rows[i] && !math.IsNaN(inf.Rows[i].Cook) {
			t.Errorf("row %d differs between 1 and 2 goroutines", i)
			break
		}
	}
	ex := exactInfluenceRat(denseRat(X), floatsRat(y))
	worst := 0.0
	for i, o := range inf.Rows {
		w := ex.obs[i]
		for name, v := range map[string][2]float64{
			"h": {o.Leverage, w.h}, "e": {o.Residual, w.e}, "t": {o.StudentExternal, w.t},
			"cook": {o.Cook, w.cook}, "covratio": {o.COVRATIO, w.covratio},
		} {
			e := relErr(v[0], v[1])
			worst = math.Max(worst, e)
			if e > 1e-9 {
				t.Errorf("row %d %s = %.17g, exact %.17g", i, name, v[0], v[1])
			}
		}
		for j, v := range inf.DFBETASRow(i) {
			e := relErr(v, w.dfbetas[j])
			worst = math.Max(worst, e)
			if e > 1e-9 {
				t.Errorf("row %d dfbetas[%d] = %.17g, exact %.17g", i, j, v, w.dfbetas[j])
			}
		}
	}
	for j, c := range f.Coef {
		if e := relErr(c.StdError, ex.se[j]); e > 1e-9 {
			t.Errorf("se%d rel err %.1e", j, e)
		}
	}
	t.Logf("condition %.3g, n = 5000: worst relative error %.1e", f.Condition, worst)
}

// TestBlockEqualsRowDerived: with derived columns the block kernel and
// the one-row kernel of the binary64 route give the same values, bit for
// bit (both add the low parts after centring).
func TestBlockEqualsRowDerived(t *testing.T) {
	tc := illCases[4]
	rng := rand.New(rand.NewPCG(3, 3))
	cols := tc.cols(rng)
	m, err := NewModel("y", tc.terms, true)
	if err != nil {
		t.Fatal(err)
	}
	X, y, err := m.Design(cols)
	if err != nil {
		t.Fatal(err)
	}
	f, err := Refit(m, X, y)
	if err != nil {
		t.Fatal(err)
	}
	if f.ext != nil || f.lo == nil {
		t.Fatal("want the binary64 route with derived columns")
	}
	p := f.P
	d := newDiag(f)
	b := new(block)
	b.init(p)
	d.block(b, 0, f.N)
	w, v := make([]float64, p), make([]float64, p)
	for i := 0; i < f.N; i++ {
		h := d.row(w, v, i)
		if h != b.h[i] {
			t.Errorf("row %d: h %v (row) != %v (block)", i, h, b.h[i])
		}
		for j := range v {
			if v[j] != b.v[j][i] {
				t.Errorf("row %d: v[%d] %v != %v", i, j, v[j], b.v[j][i])
			}
		}
	}
}

// TestDerivationsGroups: a group term spans several design columns
// (Model.termWidth), so a derived term's factors are found by column, not
// by term position; a term with a group factor is never an atom nor
// derived (its columns are indicators, or a factor's values at a level
// and 0 elsewhere), whatever column it names.
func TestDerivationsGroups(t *testing.T) {
	m, err := NewModel("y", []string{"group(batch)", "x", "x^2", "group(batch)*x", "x*z", "z", "batch", "batch^2", "group(x)"}, true)
	if err != nil {
		t.Fatal(err)
	}
	m.Levels = map[string][]string{"batch": {"A", "B", "C"}, "x": {"1", "2"}}
	names := m.Names()
	col := make(map[string]int)
	for j, nm := range names {
		col[nm] = j
	}
	der := derivations(m)
	if len(der) != m.P() {
		t.Fatalf("%d derivations for %d columns", len(der), m.P())
	}
	want := map[string]string{
		"x^2":     fmt.Sprintf("%d^2", col["x"]),
		"x*z":     fmt.Sprintf("%d^1 %d^1", col["x"], col["z"]),
		"batch^2": fmt.Sprintf("%d^2", col["batch"]),
	}
	for j, name := range names {
		got := ""
		if d := der[j]; d != nil {
			var parts []string
			for k := range d.col {
				parts = append(parts, fmt.Sprintf("%d^%d", d.col[k], d.pow[k]))
			}
			got = strings.Join(parts, " ")
		}
		if got != want[name] {
			t.Errorf("%s (column %d): derived %q, want %q", name, j, got, want[name])
		}
	}
}

// TestExactOracleGroupPoly: an uncentred cubic in x with a group term
// before it and a group-by-x term after it (the polynomial's columns do
// not sit at their term positions) takes the extended route with x^2 and
// x^3 at their exact values, and matches the exact least-squares
// solution of that design (exact rational arithmetic) to 1e-9 in every
// field checked.
func TestExactOracleGroupPoly(t *testing.T) {
	rng := rand.New(rand.NewPCG(91, 17))
	const n = 36
	x := make([]float64, n)
	y := make([]float64, n)
	batch := make([]string, n)
	for i := range x {
		x[i] = 1000 + 10*rng.Float64()
		u := (x[i] - 1005) / 10
		batch[i] = string(rune('A' + i%3))
		y[i] = 3 + 0.5*u - 2*u*u + u*u*u + 0.3*float64(i%3) + 0.05*rng.NormFloat64()
	}
	m, err := NewModel("y", []string{"group(batch)", "x", "x^2", "x^3", "group(batch)*x"}, true)
	if err != nil {
		t.Fatal(err)
	}
	d, err := m.Build(Data{Num: map[string][]float64{"x": x, "y": y}, Text: map[string][]string{"batch": batch}})
	if err != nil {
		t.Fatal(err)
	}
	f, err := d.Fit()
	if err != nil {
		t.Fatal(err)
	}
	if f.ext == nil {
		t.Fatalf("scaled condition %.3g: the case does not take the extended route", f.Condition)
	}
	names := d.Model.Names()
	xr := denseRat(d.X)
	for j, nm := range names {
		pow := map[string]int{"x^2": 2, "x^3": 3}[nm]
		if pow == 0 {
			continue
		}
		if f.lo == nil || f.lo[j] == nil {
			t.Fatalf("%s (column %d) not taken at its exact value", nm, j)
		}
		for i := range xr {
			v := big.NewRat(1, 1)
			xi := new(big.Rat).SetFloat64(x[i])
			for k := 0; k < pow; k++ {
				v.Mul(v, xi)
			}
			xr[i][j].Set(v)
		}
	}
	ex := exactInfluenceRat(xr, floatsRat(y))
	worst := 0.0
	cmp := func(name string, got, want float64) {
		t.Helper()
		e := relErr(got, want)
		worst = math.Max(worst, e)
		if e > 1e-9 {
			t.Errorf("%s = %.17g, exact %.17g (rel %.1e)", name, got, want, e)
		}
	}
	for j, c := range f.Coef {
		cmp(names[j]+" estimate", c.Estimate, ex.b[j])
		cmp(names[j]+" std error", c.StdError, ex.se[j])
	}
	cmp("RSS", f.RSS, ex.rss)
	inf := Diagnose(f)
	for i, o := range inf.Rows {
		w := ex.obs[i]
		cmp(fmt.Sprintf("row %d residual", i), o.Residual, w.e)
		cmp(fmt.Sprintf("row %d h", i), o.Leverage, w.h)
		cmp(fmt.Sprintf("row %d cook", i), o.Cook, w.cook)
		cmp(fmt.Sprintf("row %d t", i), o.StudentExternal, w.t)
		for j, v := range inf.DFBETASRow(i) {
			cmp(fmt.Sprintf("row %d dfbetas[%d]", i, j), v, w.dfbetas[j])
		}
	}
	t.Logf("scaled condition %.3g: worst rel %.1e", f.Condition, worst)
}

// TestWeightedAsGiven: a weighted fit takes its design as given (no
// derived term at its exact value: the rows √w_i x_i are not products
// of the model's terms) and takes the route its condition number calls
// for. On an uncentred quadratic (binary64 route) and an uncentred cubic
// (extended route) it matches the exact weighted least-squares values of
// the design as given to 1e-9, computed in rational arithmetic on the
// rows √w_i [x_i y_i] (weights 1/4, 1, 4, 9, whose roots are exact).
func TestWeightedAsGiven(t *testing.T) {
	sq := []struct{ w, r float64 }{{0.25, 0.5}, {1, 1}, {4, 2}, {9, 3}}
	for k, tc := range []illCase{illCases[4], illCases[1], illCases[2]} {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(80+k), 17))
			cols := tc.cols(rng)
			m, err := NewModel("y", tc.terms, true)
			if err != nil {
				t.Fatal(err)
			}
			X, y, err := m.Design(cols)
			if err != nil {
				t.Fatal(err)
			}
			n, p := X.Dims()
			w := make([]float64, n)
			xr := denseRat(X)
			yr := floatsRat(y)
			for i := range w {
				s := sq[(i*7)%len(sq)]
				w[i] = s.w
				r := new(big.Rat).SetFloat64(s.r)
				for j := 0; j < p; j++ {
					xr[i][j].Mul(xr[i][j], r)
				}
				yr[i].Mul(yr[i], r)
			}
			f, err := RefitWeighted(m, X, y, w)
			if err != nil {
				t.Fatal(err)
			}
			if f.der != nil || f.lo != nil {
				t.Fatalf("weighted fit: derived terms taken at exact values; want the design as given")
			}
			if (f.ext != nil) != (f.Condition > seminormalCond) {
				t.Fatalf("weighted fit at condition %.3g: extended route %v", f.Condition, f.ext != nil)
			}
			ex := exactInfluenceRat(xr, yr)
			worst := 0.0
			cmp := func(name string, got, want float64) {
				t.Helper()
				e := relErr(got, want)
				worst = math.Max(worst, e)
				if e > 1e-9 {
					t.Errorf("%s = %.17g, exact %.17g (rel %.1e)", name, got, want, e)
				}
			}
			for j, c := range f.Coef {
				cmp(fmt.Sprintf("b%d", j), c.Estimate, ex.b[j])
				cmp(fmt.Sprintf("se%d", j), c.StdError, ex.se[j])
			}
			cmp("RSS", f.RSS, ex.rss)
			inf := Diagnose(f)
			for i, o := range inf.Rows {
				o2 := ex.obs[i]
				cmp(fmt.Sprintf("row %d residual", i), o.Residual*math.Sqrt(w[i]), o2.e)
				cmp(fmt.Sprintf("row %d h", i), o.Leverage, o2.h)
				cmp(fmt.Sprintf("row %d cook", i), o.Cook, o2.cook)
				for j, v := range inf.DFBETASRow(i) {
					cmp(fmt.Sprintf("row %d dfbetas[%d]", i, j), v, o2.dfbetas[j])
				}
			}
			t.Logf("scaled condition %.3g: worst rel %.1e", f.Condition, worst)
		})
	}
}

// TestEqualWeightsExtended: equal weights on a design that takes the
// extended route give the unweighted fit's influence measures, bit for
// bit for weights 1 and 4 (the double-double factors are rescaled by √c
// as the binary64 ones are, weighEqually), within 1e-13 of each
// measure's largest value for 3.7, and (X'WX)^-1 = (X'X)^-1/c.
func TestEqualWeightsExtended(t *testing.T) {
	tc := illCases[2] // uncentred quartic, 1e9..1e10
	rng := rand.New(rand.NewPCG(42, 17))
	cols := tc.cols(rng)
	m, err := NewModel("y", tc.terms, true)
	if err != nil {
		t.Fatal(err)
	}
	X, y, err := m.Design(cols)
	if err != nil {
		t.Fatal(err)
	}
	f, err := Refit(m, X, y)
	if err != nil {
		t.Fatal(err)
	}
	if f.ext == nil {
		t.Fatalf("condition %.3g: not on the extended route", f.Condition)
	}
	base := Diagnose(f)
	C := f.Unscaled()
	for _, c := range []float64{1, 4, 3.7} {
		w := make([]float64, f.N)
		for i := range w {
			w[i] = c
		}
		g, err := RefitWeighted(m, X, y, w)
		if err != nil {
			t.Fatal(err)
		}
		inf := Diagnose(g)
		tol := 1e-13
		if c == 1 || c == 4 {
			tol = 0
		}
		check := func(name string, got, want []float64) {
			t.Helper()
			big := 0.0
			for _, v := range want {
				big = math.Max(big, math.Abs(v))
			}
			for i := range got {
				if d := math.Abs(got[i]-want[i]) / big; d > tol || math.IsNaN(d) {
					t.Errorf("w=%g: %s[%d] = %.17g, unweighted %.17g", c, name, i, got[i], want[i])
					return
				}
			}
		}
		get := func(inf *Influence, fn func(o Obs) float64) []float64 {
			out := make([]float64, len(inf.Rows))
			for i, o := range inf.Rows {
				out[i] = fn(o)
			}
			return out
		}
		for name, fn := range map[string]func(o Obs) float64{
			"leverage": func(o Obs) float64 { return o.Leverage },
			"residual": func(o Obs) float64 { return o.Residual },
			"rstudent": func(o Obs) float64 { return o.StudentExternal },
			"cook":     func(o Obs) float64 { return o.Cook },
			"dffits":   func(o Obs) float64 { return o.DFFITS },
			"covratio": func(o Obs) float64 { return o.COVRATIO },
		} {
			check(name, get(inf, fn), get(base, fn))
		}
		check("dfbetas", inf.DFBETAS, base.DFBETAS)
		Cw := g.Unscaled()
		for i := 0; i < f.P; i++ {
			for j := 0; j < f.P; j++ {
				if d := math.Abs(Cw.At(i, j)*c-C.At(i, j)) / math.Abs(C.At(i, j)); d > 1e-14 {
					t.Errorf("w=%g: (X'WX)^-1[%d,%d]·c differs from (X'X)^-1 by %.1e", c, i, j, d)
				}
			}
		}
	}
}

// TestFilipWeightedExact: the NIST StRD Filip data (source: NIST StRD),
// weighted 1, 4, 1/4 in turn, fitted with its design as given (the
// powers x^k rounded to double, as a weighted fit takes them), agrees
// with the exact weighted least-squares solution of that design (exact
// rational normal equations of the rows √w_i [x_i y_i]) to 13 digits or
// more: the extended route serves weighted fits as it serves ordinary
// ones (scaled condition about 4e9).
func TestFilipWeightedExact(t *testing.T) {
	d := loadNIST(t, "Filip")
	m, cols := d.model(t)
	X, y, err := m.Design(cols)
	if err != nil {
		t.Fatal(err)
	}
	n, p := X.Dims()
	roots := []float64{1, 2, 0.5}
	w := make([]float64, n)
	xr := denseRat(X)
	yr := floatsRat(y)
	for i := range w {
		r := roots[i%3]
		w[i] = r * r
		rr := new(big.Rat).SetFloat64(r)
		for j := 0; j < p; j++ {
			xr[i][j].Mul(xr[i][j], rr)
		}
		yr[i].Mul(yr[i], rr)
	}
	f, err := RefitWeighted(m, X, y, w)
	if err != nil {
		t.Fatal(err)
	}
	if f.ext == nil {
		t.Fatalf("condition %.3g: not on the extended route", f.Condition)
	}
	b := exactLSRat(xr, yr)
	worst := 15.0
	for j := range b {
		l := lre(f.Coef[j].Estimate, b[j])
		worst = math.Min(worst, l)
		if l < 13 {
			t.Errorf("b%d agrees with the exact weighted solution to %.1f digits, want >= 13", j, l)
		}
	}
	t.Logf("scaled condition %.3g: %.1f digits", f.Condition, worst)
}
