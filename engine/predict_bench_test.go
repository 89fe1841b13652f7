package engine

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// benchPoly fits a polynomial of degree p-1 (with intercept) in x to n
// seeded noisy rows on [0, 10].
func benchPoly(tb testing.TB, n, p int) *Fit {
	tb.Helper()
	rng := rand.New(rand.NewPCG(uint64(p), 15))
	terms := make([]string, p-1)
	for k := range terms {
		terms[k] = "x"
		if k > 0 {
			terms[k] = fmt.Sprintf("x^%d", k+1)
		}
	}
	x := make([]float64, n)
	y := make([]float64, n)
	for i := range x {
		x[i] = 10 * float64(i) / float64(n-1)
		// Monotone on [0, 10]: 1 + 2x + small higher powers.
		v, xk := 1.0, 1.0
		for k := 1; k < p; k++ {
			xk *= x[i] / 10
			v += 2 * xk * 10 / float64(k*k)
		}
		y[i] = v + 0.01*rng.NormFloat64()
	}
	return invPolyFit(tb, x, y, terms, true)
}

// BenchmarkPredictGrid times the predictions (fitted value, standard
// error, both intervals) over a 1,000-point grid, the points of a band.
func BenchmarkPredictGrid(b *testing.B) {
	for _, p := range []int{2, 4, 6} {
		b.Run(fmt.Sprintf("p=%d", p), func(b *testing.B) {
			f := benchPoly(b, 200, p)
			xs := make([]float64, 1000)
			for i := range xs {
				xs[i] = 10 * float64(i) / 999
			}
			b.ReportAllocs()
			for b.Loop() {
				if _, err := f.PredictGrid("x", xs, nil, IntervalOptions{}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
	// Six coefficients over five predictor columns, the grid over one.
	b.Run("p=6/columns=5", func(b *testing.B) {
		m, X, y := randomProblem(b, 3, 200, 6)
		f, err := Refit(m, X, y)
		if err != nil {
			b.Fatal(err)
		}
		fixed := map[string]float64{"x2": 7, "x3": 8, "x4": 9, "x5": 10}
		xs := make([]float64, 1000)
		for i := range xs {
			xs[i] = 1 + 10*float64(i)/999
		}
		b.ReportAllocs()
		for b.Loop() {
			if _, err := f.PredictGrid("x1", xs, fixed, IntervalOptions{}); err != nil {
				b.Fatal(err)
			}
		}
	})
}

// BenchmarkInvert times one inverse prediction (estimate, uncertainty,
// inversion set) from a prepared Calibration, and with NewCalibration.
func BenchmarkInvert(b *testing.B) {
	for _, p := range []int{2, 3, 4, 6} {
		f := benchPoly(b, 200, p)
		cal, err := NewCalibration(f, "", Interval{})
		if err != nil {
			b.Fatal(err)
		}
		y0 := f.Fitted[77]
		b.Run(fmt.Sprintf("p=%d", p), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := cal.Invert(y0, IntervalOptions{}); err != nil {
					b.Fatal(err)
				}
			}
		})
		b.Run(fmt.Sprintf("p=%d/new", p), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := f.Invert(y0, IntervalOptions{}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
