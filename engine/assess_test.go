package engine

import (
	"fmt"
	"math"
	"math/rand/v2"
	"reflect"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestAssessEqualsJudgeDiagnose: the one-pass Assess gives bit for bit the
// table of Diagnose and the verdicts of Judge, for small and large fits
// (the tail table starts at tailTableRows), both families, both Cook rules
// and both outlier tests, with planted rows: a gross outlier at high
// leverage (its deleted RSS is recomputed; it crosses the F-median Cook cutoff)
// and one far out on a single predictor (leverage near 1). The Grubbs
// test on raw residuals need not flag the high-leverage outlier, which
// pulls the fit to itself.
func TestAssessEqualsJudgeDiagnose(t *testing.T) {
	cuts := []Cutoffs{
		DefaultCutoffs(),
		{Family: SizeAdjusted, Cook: CookOne, Alpha: 0.01, Test: BonferroniTest},
		{Family: Absolute, Cook: CookFMedian, Alpha: 0.05, Test: GrubbsTest},
	}
	for _, size := range []struct{ n, p int }{{40, 3}, {3000, 4}, {20000, 6}} {
		for plant := 0; plant < 3; plant++ {
			m, X, y := randomProblem(t, uint64(7+plant), size.n, size.p)
			switch plant {
			case 1: // a gross outlier far out in predictor space
				for j := 1; j < size.p; j++ {
					X.Set(0, j, 200)
				}
				y[0] = -1e6
			case 2: // far out on one predictor: leverage near 1
				X.Set(1, size.p-1, 1e4)
			}
			f, err := Refit(m, X, y)
			if err != nil {
				t.Fatalf("n=%d p=%d plant %d: %v", size.n, size.p, plant, err)
			}
			want := Diagnose(f)
			for _, c := range cuts {
				got, vs := Assess(f, c)
				if len(got.Rows) != len(want.Rows) || !sameBits(got.DFBETAS, want.DFBETAS) {
					t.Fatalf("n=%d plant %d: DFBETAS differ", size.n, plant)
				}
				for i := range want.Rows {
					if !sameObs(got.Rows[i], want.Rows[i]) {
						t.Fatalf("n=%d plant %d row %d: Assess %+v, Diagnose %+v", size.n, plant, i, got.Rows[i], want.Rows[i])
					}
				}
				if wv := Judge(want, c); !reflect.DeepEqual(vs, wv) {
					for i := range wv {
						if !reflect.DeepEqual(vs[i], wv[i]) {
							t.Fatalf("n=%d plant %d cutoffs %+v row %d: Assess %+v, Judge %+v", size.n, plant, c, i, vs[i], wv[i])
						}
					}
				}
				if plant == 1 && c.Test == BonferroniTest && !vs[0].Outlier {
					t.Errorf("n=%d: the planted gross outlier is not an outlier: %+v", size.n, vs[0])
				}
			}
		}
	}
}

func sameBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

func sameObs(a, b Obs) bool {
	return sameBits([]float64{a.Leverage, a.Residual, a.StudentInternal, a.StudentExternal, a.Cook, a.DFFITS, a.COVRATIO, a.OutlierP, a.BonferroniP},
		[]float64{b.Leverage, b.Residual, b.StudentInternal, b.StudentExternal, b.Cook, b.DFFITS, b.COVRATIO, b.OutlierP, b.BonferroniP})
}

// TestBlockEqualsRow: the blocked kernel of diagnose gives the leverage
// and (X'X)^-1 x_i of the one-row kernel (same operations, same order;
// only the sign of an exact zero may differ), with and without an
// intercept, for p = 1..8, over full and partial blocks.
func TestBlockEqualsRow(t *testing.T) {
	for _, intercept := range []bool{true, false} {
		for p := 1; p <= 8; p++ {
			if intercept && p == 1 {
				continue
			}
			n := 3*blockRows + 17
			rng := rand.New(rand.NewPCG(uint64(p), 5))
			terms := make([]string, 0, p)
			for j := len(terms); j < p; j++ {
				if intercept && j == p-1 {
					break
				}
				terms = append(terms, fmt.Sprintf("x%d", j+1))
			}
			m, err := NewModel("y", terms, intercept)
			if err != nil {
				t.Fatal(err)
			}
			X := mat.NewDense(n, p, nil)
			y := make([]float64, n)
			for i := 0; i < n; i++ {
				for j := 0; j < p; j++ {
					v := 1e3 + 50*rng.NormFloat64()
					if intercept && j == 0 {
						v = 1
					}
					X.Set(i, j, v)
				}
				y[i] = rng.NormFloat64()
			}
			f, err := Refit(m, X, y)
			if err != nil {
				t.Fatalf("intercept %v p %d: %v", intercept, p, err)
			}
			d := newDiag(f)
			b := new(block)
			b.init(p)
			w, v := make([]float64, p), make([]float64, p)
			for lo := 0; lo < n; lo += blockRows {
				nb := min(blockRows, n-lo)
				d.block(b, lo, nb)
				for r := 0; r < nb; r++ {
					h := d.row(w, v, lo+r)
					if b.h[r] != h {
						t.Fatalf("intercept %v p %d row %d: block h %v, row h %v", intercept, p, lo+r, b.h[r], h)
					}
					for j := 0; j < p; j++ {
						if got := b.v[j][r]; got != v[j] {
							t.Fatalf("intercept %v p %d row %d: block v[%d] %v, row %v", intercept, p, lo+r, j, got, v[j])
						}
					}
				}
			}
		}
	}
}
