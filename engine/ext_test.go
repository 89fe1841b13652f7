package engine

import (
	"errors"
	"fmt"
	"math"
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
