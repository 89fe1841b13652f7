package engine

import (
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// bothRoutes fits y ~ X by the binary64 route (seminormal refinement
// with the binary64 R) and by the extended route (R again in
// double-double, refinement in double-double), from the same first pass,
// and returns both coefficient vectors, both residual vectors and the
// condition number.
func bothRoutes(tb testing.TB, m Model, X *mat.Dense, y []float64) (bs, be, es, ee []float64, cond float64) {
	tb.Helper()
	n, p := X.Dims()
	raw := X.RawMatrix()
	ws := &work{m: m, n: n, p: p, k: p + 1, xd: raw.Data, stride: raw.Stride, y: y, ch: newChunking(n, p)}
	if err := ws.factor(); err != nil {
		tb.Fatal(err)
	}
	cond = conditionUpper(ws.R, p)
	ws.der = derivations(m)
	ws.lo = designLo(ws.der, ws.xd, ws.stride, n, p)
	f := make([]float64, n)
	b, _, db := ws.refineSemi(cond, f)
	es = make([]float64, n)
	for i := range es {
		row := raw.Data[i*raw.Stride : i*raw.Stride+p]
		t := f[i]
		for j, v := range row {
			t = math.FMA(-v, db[j], t)
		}
		es[i] = ws.r[i] + t
	}
	ext := ws.factorExt()
	if ext == nil {
		tb.Fatal("factorExt failed")
	}
	b0, c0 := ws.start()
	bh, bl := ws.refineExt(ext, b0, c0, f)
	ee = make([]float64, n)
	for i := range ee {
		row := raw.Data[i*raw.Stride : i*raw.Stride+p]
		s, c := residualExt(y[i], row, ws.lo, i, bh, bl)
		ee[i] = s + c
	}
	return b, bh, es, ee, cond
}

// TestRefinePaths: below seminormalCond the binary64 route and the
// extended (double-double) route agree to rounding level, on the NIST
// StRD datasets that Refit fits by the binary64 route and on random
// problems up to the threshold's condition number, serial and parallel.
// Agreement is measured normwise on the scaled coefficients: both are
// within a few κ·eps of the exact solution.
func TestRefinePaths(t *testing.T) {
	type problem struct {
		name string
		m    Model
		X    *mat.Dense
		y    []float64
	}
	var probs []problem
	for _, name := range []string{"Norris", "Pontius", "NoInt1", "NoInt2", "Longley", "Wampler1", "Wampler4", "Wampler5"} {
		if _, err := os.Stat(filepath.Join(nistDir, name+".json")); err != nil {
			continue // TestNIST reports the missing folder
		}
		d := loadNIST(t, name)
		m, cols := d.model(t)
		X, y, err := m.Design(cols)
		if err != nil {
			t.Fatal(err)
		}
		probs = append(probs, problem{name, m, X, y})
	}
	for _, sz := range [][2]int{{50, 3}, {3000, 4}, {40000, 6}} {
		m, X, y := randomProblem(t, 3, sz[0], sz[1])
		probs = append(probs, problem{"random", m, X, y})
		// Nearly collinear: x2 = x1 + small noise, cond up to about 1e4.
		m2, X2, y2 := randomProblem(t, 4, sz[0], sz[1])
		for i := 0; i < sz[0]; i++ {
			X2.Set(i, 2, X2.At(i, 1)+1e-3*X2.At(i, 2))
		}
		probs = append(probs, problem{"collinear", m2, X2, y2})
	}
	// Uncentred polynomials below the threshold (derived columns with
	// low parts): quadratic on 1000..1010, cubic on 50..60.
	for _, k := range []int{4, 6} {
		tc := illCases[k]
		cols := tc.cols(rand.New(rand.NewPCG(uint64(k), 1)))
		m, err := NewModel("y", tc.terms, true)
		if err != nil {
			t.Fatal(err)
		}
		X, y, err := m.Design(cols)
		if err != nil {
			t.Fatal(err)
		}
		probs = append(probs, problem{"poly", m, X, y})
	}
	const eps = 0x1p-52
	for _, pr := range probs {
		bs, ba, es, ea, cond := bothRoutes(t, pr.m, pr.X, pr.y)
		n := len(pr.y)
		num, den := 0.0, 0.0
		for j := range bs {
			num += (bs[j] - ba[j]) * (bs[j] - ba[j])
			den += ba[j] * ba[j]
		}
		rb := math.Sqrt(num / den)
		// Residuals relative to |y|: Wampler1 fits exactly, and its
		// residuals are rounding noise.
		enum, eden := 0.0, 0.0
		for i := range es {
			enum += (es[i] - ea[i]) * (es[i] - ea[i])
			eden += pr.y[i] * pr.y[i]
		}
		re := math.Sqrt(enum / eden)
		t.Logf("%-9s n=%-6d cond %8.3g: coefficients differ by %.2g (relative), residuals by %.2g (relative to |y|)", pr.name, n, cond, rb, re)
		if cond > seminormalCond {
			t.Errorf("%s: cond %g above seminormalCond: the problem does not test the threshold", pr.name, cond)
		}
		if rb > 4*cond*eps || re > 4*cond*eps {
			t.Errorf("%s n=%d: the refinements differ by %.2g (coefficients), %.2g (residuals); bound %.2g", pr.name, n, rb, re, 4*cond*eps)
		}
	}
}
