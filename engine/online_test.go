package engine_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"plumb/engine"
)

// olProblem makes a random design with an intercept and p-1 predictors of
// different scales, and a response with noise.
func olProblem(rng *rand.Rand, n, p int) (*mat.Dense, []float64) {
	X := mat.NewDense(n, p, nil)
	y := make([]float64, n)
	scale := make([]float64, p)
	for j := range scale {
		scale[j] = math.Pow(10, float64(rng.IntN(5)-2))
	}
	for i := 0; i < n; i++ {
		X.Set(i, 0, 1)
		s := 0.5
		for j := 1; j < p; j++ {
			v := (rng.Float64()*4 - 1) * scale[j]
			if rng.IntN(40) == 0 {
				v *= 6 // an occasional high-leverage row
			}
			X.Set(i, j, v)
			s += v / scale[j] * float64(j)
		}
		y[i] = s + rng.NormFloat64()
		if rng.IntN(30) == 0 {
			y[i] += 8 // an occasional outlier
		}
	}
	return X, y
}

// olModel returns a model with p coefficients whose Design would give
// columns named x1..x{p-1}; only its names are used with Refit.
func olModel(tb testing.TB, p int) engine.Model {
	tb.Helper()
	terms := make([]string, p-1)
	for j := range terms {
		terms[j] = "x" + string(rune('1'+j))
	}
	m, err := engine.NewModel("y", terms, true)
	if err != nil {
		tb.Fatal(err)
	}
	return m
}

// olClose compares with a relative tolerance and an absolute floor
// relative to the scale of the quantity.
func olClose(got, want, tol, floor float64) bool {
	if math.IsNaN(want) {
		return math.IsNaN(got)
	}
	return math.Abs(got-want) <= tol*math.Max(math.Abs(want), floor)
}

func olCompare(t *testing.T, label string, got engine.Obs, gotDFB []float64, want engine.Obs, wantDFB []float64) {
	t.Helper()
	const tol = 1e-9
	type pair struct {
		name      string
		got, want float64
		floor     float64
	}
	ps := []pair{
		{"leverage", got.Leverage, want.Leverage, 1e-3},
		{"residual", got.Residual, want.Residual, math.Abs(want.Residual/want.StudentInternal) * 1e-3},
		{"internal", got.StudentInternal, want.StudentInternal, 1e-3},
		{"external", got.StudentExternal, want.StudentExternal, 1e-3},
		{"cook", got.Cook, want.Cook, 1e-6},
		{"dffits", got.DFFITS, want.DFFITS, 1e-3},
		{"covratio", got.COVRATIO, want.COVRATIO, 1e-3},
		{"outlier p", got.OutlierP, want.OutlierP, 1e-12},
		{"bonferroni p", got.BonferroniP, want.BonferroniP, 1e-12},
	}
	for j := range wantDFB {
		ps = append(ps, pair{"dfbetas", gotDFB[j], wantDFB[j], 1e-3})
	}
	for _, q := range ps {
		if !olClose(q.got, q.want, tol, q.floor) {
			t.Errorf("%s: %s = %.15g, Diagnose %.15g", label, q.name, q.got, q.want)
		}
	}
}

// TestOnlineMatchesDiagnose: for random problems, each Add's diagnostics
// equal those of the last row of Diagnose on a refit of all rows so far
// (oracle: engine.Refit + engine.Diagnose, relative 1e-9).
func TestOnlineMatchesDiagnose(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	for trial := 0; trial < 30; trial++ {
		p := 1 + rng.IntN(6)
		n := p + 2 + rng.IntN(120)
		X, y := olProblem(rng, n, p)
		m := olModel(t, p)
		o := engine.NewOnline(p)
		for i := 0; i < n; i++ {
			got, ok := o.Add(X.RawRowView(i), y[i])
			k := i + 1
			if k <= p+1 {
				if ok {
					t.Fatalf("trial %d: Add returned true at n = %d <= p+1 = %d", trial, k, p+1)
				}
				continue
			}
			if !ok {
				t.Fatalf("trial %d: Add returned false at n = %d, p = %d", trial, k, p)
			}
			// Compare at a sample of steps (every step for small n).
			if k > 20 && k%7 != 0 && k != n {
				continue
			}
			Xk := X.Slice(0, k, 0, p).(*mat.Dense)
			f, err := engine.Refit(m, mat.DenseCopyOf(Xk), y[:k])
			if err != nil {
				t.Fatalf("trial %d, n = %d: %v", trial, k, err)
			}
			inf := engine.Diagnose(f)
			olCompare(t, "trial "+itoa(trial)+" n="+itoa(k), got, o.DFBETAS(), inf.Rows[k-1], inf.DFBETASRow(k-1))
			if e := math.Abs(o.RSS()-f.RSS) / f.RSS; e > 1e-9 {
				t.Errorf("trial %d, n = %d: RSS %.15g, refit %.15g", trial, k, o.RSS(), f.RSS)
			}
		}
	}
}

func itoa(i int) string {
	const d = "0123456789"
	if i < 10 {
		return d[i : i+1]
	}
	return itoa(i/10) + d[i%10:i%10+1]
}

// TestOnlineLongStream: after 1e5 rows the online coefficients, RSS and
// last-row diagnostics still agree with a refit of all rows (oracle:
// engine.Refit + engine.Diagnose).
func TestOnlineLongStream(t *testing.T) {
	if testing.Short() {
		t.Skip("long stream")
	}
	rng := rand.New(rand.NewPCG(17, 19))
	const n, p = 100_000, 4
	X, y := olProblem(rng, n, p)
	// A drifting, offset predictor makes the stream harder.
	for i := 0; i < n; i++ {
		X.Set(i, 3, 1000+float64(i)*0.01+rng.Float64())
		y[i] += 0.002 * X.At(i, 3)
	}
	o := engine.NewOnline(p)
	var last engine.Obs
	for i := 0; i < n; i++ {
		last, _ = o.Add(X.RawRowView(i), y[i])
	}
	f, err := engine.Refit(olModel(t, p), X, y)
	if err != nil {
		t.Fatal(err)
	}
	b := o.Coef(nil)
	for j := range b {
		if e := math.Abs(b[j]-f.Coef[j].Estimate) / math.Max(math.Abs(f.Coef[j].Estimate), f.Coef[j].StdError); e > 1e-9 {
			t.Errorf("b%d = %.15g, refit %.15g", j, b[j], f.Coef[j].Estimate)
		}
	}
	if e := math.Abs(o.RSS()-f.RSS) / f.RSS; e > 1e-9 {
		t.Errorf("RSS %.15g, refit %.15g", o.RSS(), f.RSS)
	}
	inf := engine.Diagnose(f)
	olCompare(t, "last row", last, o.DFBETAS(), inf.Rows[n-1], inf.DFBETASRow(n-1))
}

// TestOnlineSeed: seeding from a fit, or from a batch, and adding rows
// equals adding every row one by one.
func TestOnlineSeed(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	X, y := olProblem(rng, 60, 3)
	f, err := engine.Refit(olModel(t, 3), mat.DenseCopyOf(X.Slice(0, 40, 0, 3)), y[:40])
	if err != nil {
		t.Fatal(err)
	}
	a := engine.NewOnline(3)
	a.Seed(f)
	b, err := engine.NewOnlineFrom(X.Slice(0, 40, 0, 3), y[:40])
	if err != nil {
		t.Fatal(err)
	}
	c := engine.NewOnline(3)
	for i := 0; i < 40; i++ {
		c.Add(X.RawRowView(i), y[i])
	}
	if a.N() != 40 || b.N() != 40 {
		t.Fatalf("N = %d, %d", a.N(), b.N())
	}
	for i := 40; i < 60; i++ {
		oa, _ := a.Add(X.RawRowView(i), y[i])
		ob, _ := b.Add(X.RawRowView(i), y[i])
		oc, _ := c.Add(X.RawRowView(i), y[i])
		olCompare(t, "seeded", oa, a.DFBETAS(), oc, c.DFBETAS())
		olCompare(t, "from batch", ob, b.DFBETAS(), oc, c.DFBETAS())
	}
	if _, err := engine.NewOnlineFrom(mat.NewDense(2, 2, []float64{1, math.NaN(), 1, 2}), []float64{1, 2}); err == nil {
		t.Error("NaN in the batch: no error")
	}
	if _, ok := c.Add([]float64{1, math.Inf(1), 0}, 1); ok || c.N() != 60 {
		t.Errorf("Inf row: ok = %v, N = %d (want false, 60)", ok, c.N())
	}
}

// TestOnlineDegenerate: rows that do not yet determine the fit give
// false, and a row with leverage 1 gives NaN deletion measures, as
// Diagnose does.
func TestOnlineDegenerate(t *testing.T) {
	o := engine.NewOnline(2)
	for i := 0; i < 5; i++ {
		if _, ok := o.Add([]float64{1, 3}, float64(i)); ok {
			t.Fatalf("row %d: true with a constant predictor", i)
		}
	}
	obs, ok := o.Add([]float64{1, 5}, 1)
	if !ok {
		t.Fatal("false once the predictor varies")
	}
	if math.Abs(obs.Leverage-1) > 1e-12 || !math.IsNaN(obs.Cook) || !math.IsNaN(obs.StudentExternal) {
		t.Errorf("single row off the line: %+v, want h = 1 and NaN measures", obs)
	}
}

// TestOnlineNoAllocs: Add does not allocate (the daemon calls it per row).
func TestOnlineNoAllocs(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	X, y := olProblem(rng, 1000, 6)
	o := engine.NewOnline(6)
	i := 0
	allocs := testing.AllocsPerRun(500, func() {
		o.Add(X.RawRowView(i%1000), y[i%1000])
		i++
	})
	if allocs != 0 {
		t.Errorf("%v allocations per Add", allocs)
	}
}
