package engine

import (
	"math"
	"math/rand/v2"
	"reflect"
	"testing"
)

// TestArrivalJudgeMatchesJudge checks ArrivalJudge against Judge on a
// one-row Influence, for rows across and below every cutoff, under both
// families and both Cook rules.
func TestArrivalJudgeMatchesJudge(t *testing.T) {
	m, err := NewModel("y", []string{"x", "x^2"}, true)
	if err != nil {
		t.Fatal(err)
	}
	p := m.P()
	rng := rand.New(rand.NewPCG(1, 2))
	for _, fam := range []Family{Absolute, SizeAdjusted} {
		for _, cook := range []CookRule{CookFMedian, CookOne} {
			c := DefaultCutoffs()
			c.Family, c.Cook = fam, cook
			a := NewArrivalJudge(m, c)
			var dst []Flag
			flagged := 0
			for k := 0; k < 2000; k++ {
				n := 5 + rng.IntN(500)
				scale := math.Pow(10, rng.Float64()*3-3) // 0.001 .. 1
				o := Obs{
					Leverage: rng.Float64() * scale * 0.2, Residual: rng.NormFloat64(),
					StudentInternal: rng.NormFloat64() * scale, StudentExternal: rng.NormFloat64() * scale,
					Cook: rng.Float64() * scale, DFFITS: rng.NormFloat64() * scale,
					COVRATIO: 1 + rng.NormFloat64()*scale*0.1, OutlierP: rng.Float64(),
					BonferroniP: 1 - rng.Float64()*scale,
				}
				if k%50 == 0 {
					o.Cook = math.NaN()
				}
				dfb := make([]float64, p)
				for i := range dfb {
					dfb[i] = rng.NormFloat64() * scale
				}
				want := Judge(&Influence{Fit: &Fit{Model: m, N: n, P: p}, Rows: []Obs{o}, DFBETAS: dfb}, a.c)[0]
				before := len(dst)
				var got Verdict
				got, dst = a.Judge(dst, o, dfb, n)
				if !reflect.DeepEqual(got, want) {
					t.Fatalf("family %v cook %v row %d: got %+v, want %+v", fam, cook, k, got, want)
				}
				if len(dst)-before != len(want.Flags) {
					t.Fatalf("row %d: dst grew by %d, want %d", k, len(dst)-before, len(want.Flags))
				}
				if len(want.Flags) > 0 {
					flagged++
				}
			}
			if flagged < 200 || flagged > 1800 {
				t.Fatalf("family %v cook %v: %d of 2000 rows flagged; the test needs both kinds", fam, cook, flagged)
			}
		}
	}
}

func TestArrivalJudgeAllocs(t *testing.T) {
	m, _ := NewModel("y", []string{"x", "x^2"}, true)
	a := NewArrivalJudge(m, DefaultCutoffs())
	dst := make([]Flag, 0, 64)
	o := Obs{Leverage: 0.9, Cook: 2, DFFITS: 3, COVRATIO: 2, BonferroniP: 0.001}
	dfb := []float64{2, -3, 0.1}
	allocs := testing.AllocsPerRun(100, func() {
		_, dst = a.Judge(dst[:0], o, dfb, 100)
	})
	if allocs != 0 {
		t.Errorf("%.1f allocations per judged row, want 0", allocs)
	}
}
