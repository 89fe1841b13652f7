package engine

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

func TestZZCond(t *testing.T) {
	for _, r := range [][2]float64{{2, 8}, {3, 9}, {1, 7}, {4, 10}, {-9, -3}, {5, 10}, {10, 20}, {1, 4}} {
		rng := rand.New(rand.NewPCG(7, 7))
		n := 40
		x := make([]float64, n)
		y := make([]float64, n)
		for i := range x {
			x[i] = r[0] + (r[1]-r[0])*rng.Float64()
			y[i] = rng.NormFloat64()
		}
		terms := []string{"x"}
		for k := 2; k <= 10; k++ {
			if k <= 9 {
				terms = append(terms, fmt.Sprintf("x^%d", k))
			} else {
				terms = append(terms, "x^9*x")
			}
		}
		m, _ := NewModel("y", terms, true)
		X, yy, _ := m.Design(map[string][]float64{"x": x, "y": y})
		f, err := Refit(m, X, yy)
		if err != nil {
			t.Logf("%v: %v", r, err)
			continue
		}
		t.Logf("%v: cond %.3g", r, f.Condition)
	}
}
