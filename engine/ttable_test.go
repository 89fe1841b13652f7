package engine

import (
	"math"
	"testing"
)

// TestTailTable: the tabulated tail agrees with the 40-digit mpmath
// values of tTailRef (dist_test.go) to 3e-15 relative, and with the direct
// evaluation to 8e-15 over a dense grid of |t| (both routes are within
// about 2.5e-15 of mpmath there: probed at 400 points on [2.5, 4) for
// df = 999993), and hands t beyond the table, NaN and ±Inf to the direct
// route.
func TestTailTable(t *testing.T) {
	for _, c := range tTailRef {
		if c.df < largeDF || c.t >= tailTableEnd {
			continue
		}
		tb := newTailTable(newTTail(c.df))
		for _, v := range []float64{c.t, -c.t} {
			if got := tb.p2(v); math.Abs(got-c.p)/c.p > 3e-15 {
				t.Errorf("df %g: table p2(%g) = %.17g, mpmath %.17g", c.df, v, got, c.p)
			}
		}
	}
	for _, df := range []float64{1000, 1001, 4321, 1e5, 999_993, 3e7} {
		tb := newTailTable(newTTail(df))
		worst, at := 0.0, 0.0
		for i := 0; i <= 100_000; i++ {
			x := float64(i) * (tailTableEnd + 0.5) / 100_000
			for _, v := range []float64{x, -x} {
				want := TTail2(v, df)
				if rel := math.Abs(tb.p2(v)-want) / want; rel > worst {
					worst, at = rel, v
				}
			}
		}
		if worst > 8e-15 {
			t.Errorf("df %g: table differs from TTail2 by %.2g (relative) at t = %g", df, worst, at)
		}
		for _, v := range []float64{math.NaN(), math.Inf(1), math.Inf(-1), 40} {
			if got, want := tb.p2(v), TTail2(v, df); got != want && !(math.IsNaN(got) && math.IsNaN(want)) {
				t.Errorf("df %g: table p2(%g) = %g, TTail2 %g", df, v, got, want)
			}
		}
	}
}

// BenchmarkTail times one outlier p-value at df = 999993 for t drawn
// from N(0, 1), by the direct route and by the table.
func BenchmarkTail(b *testing.B) {
	tt := newTTail(999_993)
	ts := make([]float64, 4096)
	for i := range ts {
		// A deterministic N(0, 1)-like spread: the inverse normal CDF
		// at evenly spaced probabilities.
		ts[i] = math.Sqrt2 * math.Erfinv(2*(float64(i)+0.5)/float64(len(ts))-1)
	}
	run := func(b *testing.B, p2 func(float64) float64) {
		s := 0.0
		for b.Loop() {
			for _, t := range ts {
				s += p2(t)
			}
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*len(ts)), "ns/value")
		if s == 0 {
			b.Fatal("no sum")
		}
	}
	b.Run("direct", func(b *testing.B) { run(b, tt.p2) })
	tb := newTailTable(tt)
	b.Run("table", func(b *testing.B) { run(b, tb.p2) })
	b.Run("build", func(b *testing.B) {
		for b.Loop() {
			newTailTable(tt)
		}
	})
}
