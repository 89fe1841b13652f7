package engine

import (
	"fmt"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// randomProblem returns a seeded random design with an intercept and p-1
// predictors, and a response with normal noise.
func randomProblem(tb testing.TB, seed uint64, n, p int) (Model, *mat.Dense, []float64) {
	tb.Helper()
	rng := rand.New(rand.NewPCG(seed, 2))
	terms := make([]string, p-1)
	for j := range terms {
		terms[j] = fmt.Sprintf("x%d", j+1)
	}
	m, err := NewModel("y", terms, true)
	if err != nil {
		tb.Fatal(err)
	}
	data := make([]float64, n*p)
	y := make([]float64, n)
	for i := 0; i < n; i++ {
		row := data[i*p : (i+1)*p]
		row[0] = 1
		s := 1.0
		for j := 1; j < p; j++ {
			row[j] = 10*rng.Float64() + float64(j)
			s += float64(j) * 0.5 * row[j]
		}
		y[i] = s + rng.NormFloat64()
	}
	return m, mat.NewDense(n, p, data), y
}

// BenchmarkInfluence times the full table: fit, diagnostics and verdicts
// (Refit and Assess, the route of plumb inspect and the daemon's refresh).
func BenchmarkInfluence(b *testing.B) {
	for _, n := range []int{1e4, 1e5, 1e6} {
		for _, p := range []int{3, 6} {
			b.Run(fmt.Sprintf("n=%d/p=%d", n, p), func(b *testing.B) {
				m, X, y := randomProblem(b, 1, n, p)
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
}

// BenchmarkStages times the stages separately at n = 1e6, p = 6.
func BenchmarkStages(b *testing.B) {
	m, X, y := randomProblem(b, 1, 1e6, 6)
	f, err := Refit(m, X, y)
	if err != nil {
		b.Fatal(err)
	}
	inf := Diagnose(f)
	b.Run("Refit", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			Refit(m, X, y)
		}
	})
	b.Run("Diagnose", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			Diagnose(f)
		}
	})
	b.Run("Judge", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			Judge(inf, DefaultCutoffs())
		}
	})
	b.Run("Assess", func(b *testing.B) {
		b.ReportAllocs()
		for b.Loop() {
			Assess(f, DefaultCutoffs())
		}
	})
}
