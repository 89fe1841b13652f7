package engine_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
	"plumb/engine"
)

// measures lists every per-row measure of a table, DFBETAS last.
func measures(inf *engine.Influence) map[string][]float64 {
	out := map[string][]float64{}
	for _, o := range inf.Rows {
		out["leverage"] = append(out["leverage"], o.Leverage)
		out["residual"] = append(out["residual"], o.Residual)
		out["rstandard"] = append(out["rstandard"], o.StudentInternal)
		out["rstudent"] = append(out["rstudent"], o.StudentExternal)
		out["cook"] = append(out["cook"], o.Cook)
		out["dffits"] = append(out["dffits"], o.DFFITS)
		out["covratio"] = append(out["covratio"], o.COVRATIO)
		out["outlier_p"] = append(out["outlier_p"], o.OutlierP)
		out["bonferroni_p"] = append(out["bonferroni_p"], o.BonferroniP)
	}
	out["dfbetas"] = inf.DFBETAS
	return out
}

// within reports the largest difference of a and b relative to the
// largest |b| of the measure (values near zero carry its rounding).
func within(a, b []float64) float64 {
	m := 0.0
	for _, v := range b {
		m = math.Max(m, math.Abs(v))
	}
	worst := 0.0
	for i := range a {
		if math.IsNaN(a[i]) && math.IsNaN(b[i]) {
			continue
		}
		worst = math.Max(worst, math.Abs(a[i]-b[i])/m)
	}
	return worst
}

func constWeights(n int, c float64) []float64 {
	w := make([]float64, n)
	for i := range w {
		w[i] = c
	}
	return w
}

// TestEqualWeights: equal weights give the unweighted fit: estimates,
// standard errors, R² and Sigma/√w within 1e-14 relative; every
// influence measure bit for bit when the weight is 1 or a power of two,
// and for any other constant within 1e-13 of the largest value of the
// measure (the property of TestScaledWeights: √3.7 and 3.7 are rounded,
// and the deleted residual sum of squares RSS - e²/(1-h) of a dominating
// row magnifies those roundings), on every R reference case without
// weights or groups.
func TestEqualWeights(t *testing.T) {
	for _, c := range loadRCases(t) {
		if c.Weights != nil || c.TextData != nil || strings.Contains(strings.Join(c.Terms, " "), "group(") {
			continue
		}
		t.Run(c.Dataset, func(t *testing.T) {
			f, inf := fitCase(t, c)
			for _, w := range []float64{1, 4, 3.7} {
				wf, err := engine.RefitWeighted(f.Model, f.X(), f.Y(), constWeights(f.N, w))
				if err != nil {
					t.Fatal(err)
				}
				for j := range f.Coef {
					got, want := wf.Coef[j], f.Coef[j]
					if d := math.Abs(got.Estimate-want.Estimate) / math.Abs(want.Estimate); d > 1e-14 {
						t.Errorf("w=%g: estimate %s differs by %.2g", w, want.Term, d)
					}
					if d := math.Abs(got.StdError-want.StdError) / want.StdError; d > 1e-14 {
						t.Errorf("w=%g: std error %s differs by %.2g", w, want.Term, d)
					}
				}
				if d := math.Abs(wf.Sigma/math.Sqrt(w)-f.Sigma) / f.Sigma; d > 1e-14 {
					t.Errorf("w=%g: sigma/√w differs by %.2g", w, d)
				}
				if d := math.Abs(wf.RSquared-f.RSquared) / f.RSquared; d > 1e-14 {
					t.Errorf("w=%g: R² differs by %.2g", w, d)
				}
				got, want := measures(engine.Diagnose(wf)), measures(inf)
				for k := range want {
					d := within(got[k], want[k])
					if ((w == 1 || w == 4) && d != 0) || d > 1e-13 {
						t.Errorf("w=%g: %s differs by %.2g", w, k, d)
					}
				}
			}
		})
	}
}

// TestScaledWeights: multiplying every weight by a constant changes no
// influence measure: bit for bit for a power of two (√(4w) = 2√w
// exactly), within 1e-13 for 3.
func TestScaledWeights(t *testing.T) {
	for _, c := range loadRCases(t) {
		if c.Weights == nil {
			continue
		}
		t.Run(c.Dataset, func(t *testing.T) {
			f, inf := fitCase(t, c)
			base := measures(inf)
			for _, k := range []float64{4, 3, 1e-3} {
				w := make([]float64, f.N)
				for i := range w {
					w[i] = f.Weights[i] * k
				}
				g, err := engine.RefitWeighted(f.Model, f.X(), f.Y(), w)
				if err != nil {
					t.Fatal(err)
				}
				got := measures(engine.Diagnose(g))
				for name := range base {
					d := within(got[name], base[name])
					if (k == 4 && d != 0) || d > 1e-13 {
						t.Errorf("weights ×%g: %s moves by %.2g", k, name, d)
					}
				}
				if d := math.Abs(g.RSS/k-f.RSS) / f.RSS; d > 1e-14 {
					t.Errorf("weights ×%g: RSS/k differs by %.2g", k, d)
				}
			}
		})
	}
}

// TestBadWeights: a zero, negative, NaN or infinite weight, or a
// variance function that gives one, is a *DataError naming the row and
// the column, never a crash.
func TestBadWeights(t *testing.T) {
	x := []float64{1, 2, 3, 4, 5, 6}
	y := []float64{1.1, 2.3, 2.9, 4.2, 5.1, 5.8}
	tests := []struct {
		name      string
		weighting string
		col       []float64
		row       int
		err       error
	}{
		{"zero", "w", []float64{1, 1, 0, 1, 1, 1}, 2, engine.ErrWeight},
		{"negative", "w", []float64{1, 1, 1, -2, 1, 1}, 3, engine.ErrWeight},
		{"NaN", "w", []float64{1, math.NaN(), 1, 1, 1, 1}, 1, engine.ErrWeight},
		{"infinite", "w", []float64{1, 1, 1, 1, math.Inf(1), 1}, 4, engine.ErrWeight},
		{"inverse of zero", "inverse(w)", []float64{1, 1, 1, 1, 1, 0}, 5, engine.ErrWeight},
		{"inverse of negative", "inverse(w)", []float64{-1, 1, 1, 1, 1, 1}, 0, engine.ErrWeight},
		{"underflow", "inverse(w^2)", []float64{1, 1, 1e300, 1, 1, 1}, 2, engine.ErrWeight},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m, _ := engine.NewModel("y", []string{"x"}, true)
			var err error
			if m.Weight, err = engine.ParseWeighting(tt.weighting); err != nil {
				t.Fatal(err)
			}
			_, err = m.Build(engine.Data{Num: map[string][]float64{"x": x, "y": y, "w": tt.col}})
			var de *engine.DataError
			if !errors.As(err, &de) || !errors.Is(err, tt.err) || de.Row != tt.row || de.Column != "w" {
				t.Errorf("Build: %v, want a *DataError at row %d, column w, wrapping %v", err, tt.row, tt.err)
			}
		})
	}
	// RefitWeighted checks its weights too.
	X := mat.NewDense(6, 2, []float64{1, 1, 1, 2, 1, 3, 1, 4, 1, 5, 1, 6})
	m, _ := engine.NewModel("y", []string{"x"}, true)
	_, err := engine.RefitWeighted(m, X, y, []float64{1, 1, 1, 1, 0, 1})
	var de *engine.DataError
	if !errors.As(err, &de) || !errors.Is(err, engine.ErrWeight) || de.Row != 4 {
		t.Errorf("RefitWeighted with a zero weight: %v", err)
	}
}

func TestParseWeighting(t *testing.T) {
	tests := []struct {
		in   string
		want engine.Weighting
		bad  bool
	}{
		{"", engine.Weighting{}, false},
		{"w", engine.Weighting{Column: "w"}, false},
		{" inverse( conc ) ", engine.Weighting{Column: "conc", Power: 1}, false},
		{"inverse(conc^2)", engine.Weighting{Column: "conc", Power: 2}, false},
		{`inverse("flow (l/min)"^2)`, engine.Weighting{Column: "flow (l/min)", Power: 2}, false},
		{"inverse", engine.Weighting{Column: "inverse"}, false},
		{`"inverse(x)"`, engine.Weighting{Column: "inverse(x)"}, false},
		{"inverse(x", engine.Weighting{}, true},
		{"inverse(x^0)", engine.Weighting{}, true},
		{"w z", engine.Weighting{}, true},
		{"log(w)", engine.Weighting{}, true},
	}
	for _, tt := range tests {
		got, err := engine.ParseWeighting(tt.in)
		if tt.bad {
			var te *engine.TermError
			if !errors.As(err, &te) {
				t.Errorf("ParseWeighting(%q) = %+v, %v; want a *TermError", tt.in, got, err)
			}
			continue
		}
		if err != nil || got != tt.want {
			t.Errorf("ParseWeighting(%q) = %+v, %v; want %+v", tt.in, got, err, tt.want)
			continue
		}
		again, err := engine.ParseWeighting(got.String())
		if err != nil || again != got {
			t.Errorf("round trip of %q through %q: %+v, %v", tt.in, got.String(), again, err)
		}
	}
}

// TestPRESSLeaveOneOut: PRESS from the closed form equals the sum of
// squared leave-one-out prediction errors from n refits, weighted and
// not (the weighted ones weighted by w_i).
func TestPRESSLeaveOneOut(t *testing.T) {
	for _, c := range loadRCases(t) {
		t.Run(c.Dataset, func(t *testing.T) {
			f, inf := fitCase(t, c)
			fc := engine.CheckForm(f, inf)
			n, p := f.N, f.P
			X := f.X()
			var sum float64
			row := make([]float64, p)
			for i := 0; i < n; i++ {
				Xi := mat.NewDense(n-1, p, nil)
				yi := make([]float64, 0, n-1)
				var wi []float64
				r := 0
				for k := 0; k < n; k++ {
					if k == i {
						continue
					}
					Xi.SetRow(r, X.RawRowView(k))
					yi = append(yi, f.Y()[k])
					if f.Weights != nil {
						wi = append(wi, f.Weights[k])
					}
					r++
				}
				g, err := engine.RefitWeighted(f.Model, Xi, yi, wi)
				if err != nil {
					t.Fatalf("leave-one-out refit without row %d: %v (no reference case has a row of leverage 1)", i, err)
				}
				copy(row, X.RawRowView(i))
				yhat, _ := g.Predict(row)
				e := f.Y()[i] - yhat
				w := 1.0
				if f.Weights != nil {
					w = f.Weights[i]
				}
				sum += w * e * e
			}
			if d := math.Abs(fc.PRESS-sum) / sum; d > 1e-9 {
				t.Errorf("PRESS %.17g, leave-one-out refits %.17g (relative %.2g)", fc.PRESS, sum, d)
			}
		})
	}
}

// TestOnlineWeighted: an online fit seeded from a weighted fit of the
// first n-1 rows, given the last row with its weight, reports the
// measures Diagnose gives that row in the weighted fit of all n rows.
func TestOnlineWeighted(t *testing.T) {
	for _, c := range loadRCases(t) {
		if c.Weights == nil {
			continue
		}
		t.Run(c.Dataset, func(t *testing.T) {
			f, inf := fitCase(t, c)
			n, p := f.N, f.P
			head, err := engine.RefitWeighted(f.Model, mat.DenseCopyOf(f.X().Slice(0, n-1, 0, p)), f.Y()[:n-1], f.Weights[:n-1])
			if err != nil {
				t.Fatal(err)
			}
			o := engine.NewOnline(p)
			o.Seed(head)
			ob, ok := o.AddWeighted(f.X().RawRowView(n-1), f.Y()[n-1], f.Weights[n-1])
			if !ok {
				t.Fatal("AddWeighted: not judged")
			}
			want := inf.Rows[n-1]
			for _, m := range []struct {
				name      string
				got, want float64
			}{
				{"leverage", ob.Leverage, want.Leverage},
				{"residual", ob.Residual, want.Residual},
				{"rstudent", ob.StudentExternal, want.StudentExternal},
				{"cook", ob.Cook, want.Cook},
				{"dffits", ob.DFFITS, want.DFFITS},
				{"covratio", ob.COVRATIO, want.COVRATIO},
				{"bonferroni", ob.BonferroniP, want.BonferroniP},
			} {
				if math.Abs(m.got-m.want) > 1e-9*math.Abs(m.want) {
					t.Errorf("%s: online %.17g, Diagnose %.17g", m.name, m.got, m.want)
				}
			}
			dfb := o.DFBETAS()
			big := 0.0
			for _, w := range inf.DFBETASRow(n - 1) {
				big = math.Max(big, math.Abs(w))
			}
			for j := 0; j < p; j++ {
				// Relative to the row's largest DFBETAS (a zero one
				// carries its rounding).
				if w := inf.DFBETASRow(n - 1)[j]; math.Abs(dfb[j]-w) > 1e-9*math.Max(math.Abs(w), big) {
					t.Errorf("dfbetas[%d]: online %.17g, Diagnose %.17g", j, dfb[j], w)
				}
			}
			if _, ok := o.AddWeighted(f.X().RawRowView(0), 1, 0); ok {
				t.Error("AddWeighted with weight 0 was judged")
			}
		})
	}
}

// TestFormChecksWeighted: a weighted fit whose weights follow the true
// variance passes Breusch-Pagan where the unweighted fit fails it
// (invented data, seeded: standard deviation proportional to x).
func TestFormChecksWeighted(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	n := 400
	x := make([]float64, n)
	y := make([]float64, n)
	for i := range x {
		x[i] = 1 + 99*float64(i%40)/39
		y[i] = 2 + 0.5*x[i] + 0.05*x[i]*rng.NormFloat64()
	}
	m, _ := engine.NewModel("y", []string{"x"}, true)
	d, err := m.Build(engine.Data{Num: map[string][]float64{"x": x, "y": y}})
	if err != nil {
		t.Fatal(err)
	}
	f, _ := d.Fit()
	plain := engine.CheckForm(f, nil)
	m.Weight, _ = engine.ParseWeighting("inverse(x^2)")
	d, err = m.Build(engine.Data{Num: map[string][]float64{"x": x, "y": y}})
	if err != nil {
		t.Fatal(err)
	}
	wf, _ := d.Fit()
	weighted := engine.CheckForm(wf, nil)
	if !(plain.BreuschPagan.P < 1e-6) || !(weighted.BreuschPagan.P > 0.01) {
		t.Errorf("Breusch-Pagan p: unweighted %g (want < 1e-6), weighted 1/x² %g (want > 0.01)",
			plain.BreuschPagan.P, weighted.BreuschPagan.P)
	}
	if plain.LackOfFit == nil || weighted.LackOfFit == nil || weighted.LackOfFit.Groups != 40 {
		t.Errorf("lack of fit: %+v, %+v", plain.LackOfFit, weighted.LackOfFit)
	}
	want := engine.DWNormal
	if n <= engine.DWExactRows {
		want = engine.DWExact
	}
	if plain.DurbinWatson.Method != want || weighted.DurbinWatson.Method != want {
		t.Errorf("Durbin-Watson method %q, %q at n = %d, want %q", plain.DurbinWatson.Method, weighted.DurbinWatson.Method, n, want)
	}
	// Independent errors in row order: no evidence of autocorrelation.
	if !(plain.DurbinWatson.P > 0.001) || !(weighted.DurbinWatson.P > 0.001) {
		t.Errorf("Durbin-Watson p %g, %g on independent errors", plain.DurbinWatson.P, weighted.DurbinWatson.P)
	}
}

// TestWeightedNonFiniteX: a NaN in the design of a weighted fit is a
// *DataError naming its row and term, as for an unweighted one.
func TestWeightedNonFiniteX(t *testing.T) {
	for _, n := range []int{10, 40000} {
		X := mat.NewDense(n, 2, nil)
		y := make([]float64, n)
		w := make([]float64, n)
		for i := 0; i < n; i++ {
			X.Set(i, 0, 1)
			X.Set(i, 1, float64(i%17))
			y[i] = float64(i%13) + 0.5
			w[i] = 1 + float64(i%3)
		}
		bad := n - 3
		X.Set(bad, 1, math.NaN())
		m, _ := engine.NewModel("y", []string{"x"}, true)
		_, err := engine.RefitWeighted(m, X, y, w)
		var de *engine.DataError
		if !errors.As(err, &de) || de.Row != bad || de.Column != "x" || !errors.Is(err, engine.ErrNonFinite) {
			t.Errorf("n=%d: %v, want a *DataError at row %d, term x", n, err, bad)
		}
		X.Set(bad, 1, 1)
		y[bad+1] = math.Inf(1)
		_, err = engine.RefitWeighted(m, X, y, w)
		if !errors.As(err, &de) || de.Row != bad+1 || de.Column != "y" {
			t.Errorf("n=%d: %v, want a *DataError at row %d, response y", n, err, bad+1)
		}
	}
}

// TestLoadCellLackOfFit: on the NIST StRD Pontius load-cell data (from
// memory, the data of the NIST/SEMATECH e-Handbook's load-cell case
// study, section 4.6.1; 20 loads measured twice) the lack-of-fit test
// rejects the straight line and not the quadratic, with R's anova values
// (testdata/reference/pontius_*.json, compared to 1e-9 in
// TestRFormChecks).
func TestLoadCellLackOfFit(t *testing.T) {
	got := map[string]*engine.LackOfFit{}
	for _, c := range loadRCases(t) {
		if strings.HasPrefix(c.Dataset, "pontius_") {
			f, inf := fitCase(t, c)
			got[c.Dataset] = engine.CheckForm(f, inf).LackOfFit
		}
	}
	line, quad := got["pontius_line"], got["pontius_quadratic"]
	if line == nil || quad == nil {
		t.Fatalf("lack of fit: line %+v, quadratic %+v", line, quad)
	}
	if line.Groups != 20 || line.PureErrorDF != 20 || line.LackOfFitDF != 18 || quad.LackOfFitDF != 17 {
		t.Errorf("degrees of freedom: line %+v, quadratic %+v", line, quad)
	}
	if !(line.P < 1e-15) || !(quad.P > 0.5) {
		t.Errorf("line p %g (want < 1e-15), quadratic p %g (want > 0.5)", line.P, quad.P)
	}
}
