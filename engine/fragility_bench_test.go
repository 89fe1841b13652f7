package engine_test

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"plumb/engine"
)

// frBenchFit fits y ~ x1 + x2 (p = 3) on n seeded rows with clear effects,
// so that no small removal breaks a default conclusion and the whole
// search runs.
func frBenchFit(tb testing.TB, n int) *engine.Fit {
	tb.Helper()
	rng := rand.New(rand.NewPCG(uint64(n), 1))
	x1, x2, y := make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range y {
		x1[i] = rng.Float64() * 10
		x2[i] = rng.NormFloat64()
		y[i] = 1 + 0.8*x1[i] - 0.5*x2[i] + rng.NormFloat64()
	}
	m, _ := engine.NewModel("y", []string{"x1", "x2"}, true)
	return frFit(tb, m, map[string][]float64{"x1": x1, "x2": x2, "y": y})
}

// BenchmarkFragility: exhaustive search up to m = 2 at n = 2,000 (about
// 2e6 subsets), and at n = 1e6 the exhaustive m = 1 pass plus the top-50
// candidate search for m = 2, 3.
func BenchmarkFragility(b *testing.B) {
	for _, bc := range []struct {
		n, maxM int
		want    string
	}{
		{2000, 2, "exhaustive"},
		{1_000_000, 3, "exhaustive for 1 removed, top 50 candidates for 2-3"},
	} {
		b.Run(fmt.Sprintf("n=%d/m<=%d", bc.n, bc.maxM), func(b *testing.B) {
			f := frBenchFit(b, bc.n)
			inf := engine.Diagnose(f)
			opt := engine.FragilityOptions{MaxRemoved: bc.maxM}
			b.ReportAllocs()
			for b.Loop() {
				res, err := engine.Fragility(f, inf, engine.Conclusions{}, opt)
				if err != nil || res.Searched != bc.want || res.Index != 0 {
					b.Fatalf("%+v, %v", res, err)
				}
			}
		})
	}
}

// BenchmarkSuggest: 1,000 candidates at n = 1e5 (a quadratic in one
// column on a 1,000-point grid, and three columns on a 10³ grid),
// including the fragility search before and after the top three.
func BenchmarkSuggest(b *testing.B) {
	const n = 100_000
	rng := rand.New(rand.NewPCG(2, 3))
	x, z, w, y := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range y {
		x[i], z[i], w[i] = rng.Float64()*50, rng.Float64(), rng.Float64()
		y[i] = 3 + 0.4*x[i] - 0.01*x[i]*x[i] + z[i] - w[i] + rng.NormFloat64()*0.5
	}
	x[0], y[0] = 80, 3+0.4*80-0.01*6400+4 // one influential reading
	cols := map[string][]float64{"x": x, "z": z, "w": w, "y": y}
	for _, bc := range []struct {
		name  string
		terms []string
		grid  int
	}{
		{"1col-1000", []string{"x", "x^2"}, 1000},
		{"3col-10^3", []string{"x", "z", "w"}, 10},
	} {
		b.Run(bc.name, func(b *testing.B) {
			m, _ := engine.NewModel("y", bc.terms, true)
			f := frFit(b, m, cols)
			inf := engine.Diagnose(f)
			v := engine.Judge(inf, engine.DefaultCutoffs())
			region, err := engine.RegionOf(m, cols)
			if err != nil {
				b.Fatal(err)
			}
			opt := engine.SuggestOptions{Grid: bc.grid}
			b.ReportAllocs()
			for b.Loop() {
				s, err := engine.Suggest(f, inf, v, region, opt)
				if err != nil || len(s) == 0 {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkOnlineAdd: one row folded in and diagnosed, p = 3 and 6.
func BenchmarkOnlineAdd(b *testing.B) {
	for _, p := range []int{3, 6} {
		b.Run(fmt.Sprintf("p=%d", p), func(b *testing.B) {
			rng := rand.New(rand.NewPCG(uint64(p), 7))
			X, y := olProblem(rng, 4096, p)
			o := engine.NewOnline(p)
			for i := 0; i < 64; i++ {
				o.Add(X.RawRowView(i), y[i])
			}
			i := 0
			b.ReportAllocs()
			for b.Loop() {
				o.Add(X.RawRowView(i&4095), y[i&4095])
				i++
			}
		})
	}
}
