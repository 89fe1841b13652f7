package engine

import (
	"math"
	"reflect"
	"testing"
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
