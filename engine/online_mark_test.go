package engine

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestOnlineRestore: rows added after a Snapshot are undone by Restore, so
// the next Add gives the same diagnostics as if they had never been added.
func TestOnlineRestore(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 8))
	row := func() ([]float64, float64) {
		x := rng.Float64() * 10
		return []float64{1, x}, 1 + 2*x + rng.NormFloat64()
	}
	a, b := NewOnline(2), NewOnline(2)
	for range 20 {
		x, y := row()
		a.Add(x, y)
		b.Add(x, y)
	}
	mark := a.Snapshot()
	for range 5 {
		x, y := row()
		a.Add(x, y)
	}
	a.Restore(mark)
	x, y := row()
	oa, _ := a.Add(x, y)
	ob, _ := b.Add(x, y)
	if a.N() != b.N() {
		t.Fatalf("N = %d, want %d", a.N(), b.N())
	}
	for _, c := range [][2]float64{{oa.Leverage, ob.Leverage}, {oa.StudentExternal, ob.StudentExternal}, {oa.Cook, ob.Cook}} {
		if math.Abs(c[0]-c[1]) > 1e-12*math.Abs(c[1]) {
			t.Errorf("after Restore got %g, want %g", c[0], c[1])
		}
	}
}
