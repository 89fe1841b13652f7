package engine

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// linWeights returns a with ŷ(x0) = a'y for the least-squares fit on X,
// computed independently of the engine: gonum's Householder QR solves
// X'X c = x0 as R'R c = x0, then a = X c.
func linWeights(t *testing.T, X *mat.Dense, x0 []float64) []float64 {
	t.Helper()
	n, p := X.Dims()
	var qr mat.QR
	qr.Factorize(X)
	var R mat.Dense
	qr.RTo(&R)
	r := mat.DenseCopyOf(R.Slice(0, p, 0, p))
	c := mat.NewVecDense(p, append([]float64(nil), x0...))
	var u mat.VecDense
	if err := u.SolveVec(r.T(), c); err != nil {
		t.Fatal(err)
	}
	var w mat.VecDense
	if err := w.SolveVec(r, &u); err != nil {
		t.Fatal(err)
	}
	var a mat.VecDense
	a.MulVec(X, &w)
	out := make([]float64, n)
	for i := range out {
		out[i] = a.AtVec(i)
	}
	return out
}

// TestShiftAt checks the standard error of the shift against the
// variance of the linear combination it is: Change = (a_new - a_old)'y
// over the union of rows, Var = σ²‖a_new - a_old‖² (common practice: the
// variance of a linear function of independent readings of equal
// variance), with the weights a from an independent QR.
func TestShiftAt(t *testing.T) {
	rng := rand.New(rand.NewPCG(15, 7))
	var x, y []float64
	for i := 0; i < 60; i++ {
		v := float64(i%20) * 23
		x = append(x, v)
		y = append(y, 0.01+0.0395*v+2.1e-5*v*v+0.01*rng.NormFloat64())
	}
	base := invPolyFit(t, x[:30], y[:30], []string{"x", "x^2"}, true)
	later := invPolyFit(t, x[30:], y[30:], []string{"x", "x^2"}, true)
	all := invPolyFit(t, x, y, []string{"x", "x^2"}, true)
	for _, tc := range []struct {
		name     string
		old, new *Fit
		overlap  Overlap
		oldRows  []int // rows of x the fits use
		newRows  []int
	}{
		{"nested", base, all, Nested, seq(0, 30), seq(0, 60)},
		{"disjoint", base, later, Disjoint, seq(0, 30), seq(30, 60)},
	} {
		for _, v := range []float64{0, 100, 230, 437, 500} {
			x0 := []float64{1, v, v * v}
			s := ShiftAt(tc.old, tc.new, x0, tc.overlap)
			ao := linWeights(t, tc.old.X(), x0)
			an := linWeights(t, tc.new.X(), x0)
			d := make(map[int]float64)
			for k, i := range tc.oldRows {
				d[i] -= ao[k]
			}
			for k, i := range tc.newRows {
				d[i] += an[k]
			}
			ss := 0.0
			for _, w := range d {
				ss += w * w
			}
			want := tc.new.Sigma * math.Sqrt(ss)
			if invRelErr(s.SE, want, 0) > 1e-9 {
				t.Errorf("%s at x = %v: SE %.15g, from the weights %.15g", tc.name, v, s.SE, want)
			}
			change := 0.0
			for i, w := range d {
				change += w * y[i]
			}
			if math.Abs(s.Change-change) > 1e-9*math.Max(1, math.Abs(s.New)) || s.Change != s.New-s.Old || s.Z != s.Change/s.SE {
				t.Errorf("%s at x = %v: change %v (new %v - old %v), from the weights %v", tc.name, v, s.Change, s.New, s.Old, change)
			}
		}
	}
	// The same fit compared with itself: no change, no uncertainty.
	s := ShiftAt(all, all, []float64{1, 200, 40000}, Nested)
	if s.Change != 0 || s.SE != 0 || s.Z != 0 {
		t.Errorf("a fit against itself: %+v", s)
	}
}

func seq(lo, hi int) []int {
	out := make([]int, 0, hi-lo)
	for i := lo; i < hi; i++ {
		out = append(out, i)
	}
	return out
}
