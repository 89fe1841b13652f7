package engine

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"strconv"
	"syscall"
	"testing"
	"time"
)

// pairedRatio runs a and b alternately runs times (the order swapped
// every other pair, so that drift hits both alike) and returns the
// median time of each and the median of the per-pair ratios b/a.
func pairedRatio(runs int, a, b func()) (ta, tb, ratio time.Duration, r float64) {
	var as, bs []time.Duration
	var rs []float64
	for k := 0; k < runs; k++ {
		var da, db time.Duration
		if k%2 == 0 {
			t0 := time.Now()
			a()
			da = time.Since(t0)
			t0 = time.Now()
			b()
			db = time.Since(t0)
		} else {
			t0 := time.Now()
			b()
			db = time.Since(t0)
			t0 = time.Now()
			a()
			da = time.Since(t0)
		}
		as, bs, rs = append(as, da), append(bs, db), append(rs, float64(db)/float64(da))
	}
	slices.Sort(as)
	slices.Sort(bs)
	slices.Sort(rs)
	return as[runs/2], bs[runs/2], 0, rs[runs/2]
}

// BenchmarkWeightsPaired times the full table (Refit or RefitWeighted,
// then Assess) at n = 1e6, p = 6, unweighted and with unequal weights,
// alternately within one process, and reports the medians and the
// median paired ratio weighted/unweighted.
func BenchmarkWeightsPaired(b *testing.B) {
	m, X, y := randomProblem(b, 1, 1e6, 6)
	rng := rand.New(rand.NewPCG(9, 9))
	w := make([]float64, len(y))
	for i := range w {
		w[i] = 0.5 + rng.Float64()
	}
	c := DefaultCutoffs()
	plain := func() {
		f, err := Refit(m, X, y)
		if err != nil {
			b.Fatal(err)
		}
		Assess(f, c)
	}
	weighted := func() {
		f, err := RefitWeighted(m, X, y, w)
		if err != nil {
			b.Fatal(err)
		}
		Assess(f, c)
	}
	for b.Loop() {
		tu, tw, _, r := pairedRatio(11, plain, weighted)
		b.ReportMetric(float64(tu.Microseconds())/1e3, "unweighted-ms")
		b.ReportMetric(float64(tw.Microseconds())/1e3, "weighted-ms")
		b.ReportMetric(r, "ratio")
	}
}

// BenchmarkFormChecksPaired times an analysis (Refit and Assess) and the
// model-form checks (CheckForm) at n = 1e5, p = 6, alternately, and
// reports the median paired ratio checks/analysis.
func BenchmarkFormChecksPaired(b *testing.B) {
	for _, weighted := range []bool{false, true} {
		b.Run(fmt.Sprintf("weighted=%v", weighted), func(b *testing.B) {
			m, X, y := randomProblem(b, 2, 1e5, 6)
			var w []float64
			if weighted {
				rng := rand.New(rand.NewPCG(9, 9))
				w = make([]float64, len(y))
				for i := range w {
					w[i] = 0.5 + rng.Float64()
				}
			}
			c := DefaultCutoffs()
			var f *Fit
			var inf *Influence
			analysis := func() {
				var err error
				f, err = RefitWeighted(m, X, y, w)
				if err != nil {
					b.Fatal(err)
				}
				inf, _ = Assess(f, c)
			}
			analysis()
			checks := func() { CheckForm(f, inf) }
			for b.Loop() {
				ta, tc, _, r := pairedRatio(9, analysis, checks)
				b.ReportMetric(float64(ta.Microseconds())/1e3, "analysis-ms")
				b.ReportMetric(float64(tc.Microseconds())/1e3, "checks-ms")
				b.ReportMetric(r, "ratio")
			}
		})
	}
}

// cpuTime returns the process's user plus system CPU time.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// BenchmarkGroupFit builds and fits a model with a 50-level group at
// n = 1e5: group(batch) + months (p = 51), and with the slope
// differences too (p = 100).
func BenchmarkGroupFit(b *testing.B) {
	n, k := 100000, 50
	rng := rand.New(rand.NewPCG(4, 4))
	y := make([]float64, n)
	months := make([]float64, n)
	batch := make([]string, n)
	for i := range y {
		g := rng.IntN(k)
		batch[i] = "B" + strconv.Itoa(g)
		months[i] = float64(rng.IntN(37))
		y[i] = 100 + 0.05*float64(g) - 0.2*months[i] + 0.3*rng.NormFloat64()
	}
	d := Data{Num: map[string][]float64{"y": y, "months": months}, Text: map[string][]string{"batch": batch}}
	for _, terms := range [][]string{{"group(batch)", "months"}, {"group(batch)", "months", "group(batch)*months"}} {
		m, err := NewModel("y", terms, true)
		if err != nil {
			b.Fatal(err)
		}
		b.Run(fmt.Sprintf("terms=%d", len(terms)), func(b *testing.B) {
			b.ReportAllocs()
			// CPU time per op (user + system, all threads): on a loaded
			// machine the wall time measures the queue, this the work.
			c0 := cpuTime()
			for b.Loop() {
				ds, err := m.Build(d)
				if err != nil {
					b.Fatal(err)
				}
				if _, err := ds.Fit(); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(cpuTime()-c0)/1e6/float64(b.N), "cpu-ms/op")
		})
	}
}
