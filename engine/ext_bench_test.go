package engine

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// conditionedProblem returns randomProblem(seed, n, p) with its last
// predictor replaced by the first plus noise of size delta (p >= 3), so
// that the scaled condition number is about 6/delta.
func conditionedProblem(tb testing.TB, seed uint64, n, p int, delta float64) (Model, *mat.Dense, []float64) {
	tb.Helper()
	m, X, y := randomProblem(tb, seed, n, p)
	rng := rand.New(rand.NewPCG(seed, 9))
	for i := 0; i < n; i++ {
		X.Set(i, p-1, X.At(i, 1)+delta*rng.NormFloat64())
	}
	return m, X, y
}

// BenchmarkRoutes times the fit (Refit) and the full table (Refit and
// Assess) at n = 1e5, p = 5 on the binary64 route (scaled condition
// number about 30) and on the extended route (about 1e9).
func BenchmarkRoutes(b *testing.B) {
	const n, p = 100000, 5
	for _, tc := range []struct {
		name           string
		delta          float64
		condLo, condHi float64
	}{
		{"binary64", 0.3, 1, seminormalCond},
		{"extended", 6e-9, 3e8, 3e9},
	} {
		m, X, y := conditionedProblem(b, 5, n, p, tc.delta)
		f, err := Refit(m, X, y)
		if err != nil {
			b.Fatal(err)
		}
		if f.Condition < tc.condLo || f.Condition > tc.condHi {
			b.Fatalf("%s: condition %.3g outside [%.0e, %.0e]", tc.name, f.Condition, tc.condLo, tc.condHi)
		}
		b.Run(fmt.Sprintf("%s/Refit", tc.name), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := Refit(m, X, y); err != nil {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("%s/Table", tc.name), func(b *testing.B) {
			c := DefaultCutoffs()
			b.ReportAllocs()
			for b.Loop() {
				f, err := Refit(m, X, y)
				if err != nil {
					b.Fatal(err)
				}
				_, _ = Assess(f, c)
			}
		})
	}
}
