package engine

import (
	"math"
	"runtime"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/blas/gonum"
)

// Householder QR kernels on column-major blocks, and the row-chunk layout
// used by Refit and Diagnose (a "tall skinny" QR: each chunk of rows is
// factored on its own and the stacked chunk R factors are factored again).

// chunkRows is the target number of rows per chunk: small enough that a
// chunk of a design with a few columns stays in cache.
const chunkRows = 2048

// parallelRows is the smallest number of rows worth splitting over
// goroutines.
const parallelRows = 1 << 15

// houseQR factors the first p columns of the m x k column-major block a
// (leading dimension m, k >= p, m >= p) in place: on return the upper
// triangle of the first p columns holds R, the part below the diagonal the
// Householder vectors v_j (with implicit v_j[j] = 1), and tau[j] the
// reflector scalars, so that H_j = I - tau_j v_j v_j'. Columns p..k-1 are
// only transformed (they become Q' times themselves).
func houseQR(a []float64, m, p, k int, tau []float64) {
	for j := 0; j < p; j++ {
		col := a[j*m : (j+1)*m]
		alpha := col[j]
		ss := 0.0
		for _, v := range col[j+1:] {
			ss += v * v
		}
		if ss == 0 {
			tau[j] = 0
			continue
		}
		beta := -math.Copysign(math.Sqrt(alpha*alpha+ss), alpha)
		tau[j] = (beta - alpha) / beta
		scal := 1 / (alpha - beta)
		for i := j + 1; i < m; i++ {
			col[i] *= scal
		}
		col[j] = beta
		t := tau[j]
		v := col[j+1:]
		for c := j + 1; c < k; c++ {
			ac := a[c*m : (c+1)*m]
			rest := ac[j+1:]
			rest = rest[:len(v)]
			w := (ac[j] + dot(v, rest)) * t
			ac[j] -= w
			axpy(-w, v, rest)
		}
	}
}

// dot returns Σ x_i y_i (len(y) >= len(x)), by gonum's BLAS (vector
// kernels on amd64).
func dot(x, y []float64) float64 {
	n := len(x)
	return bl.Ddot(n, x, 1, y[:n], 1)
}

// axpy sets y += a x (len(y) >= len(x)).
func axpy(a float64, x, y []float64) {
	n := len(x)
	bl.Daxpy(n, a, x, 1, y[:n], 1)
}

// bl is gonum's BLAS (Go with assembly kernels on amd64, no cgo).
var bl gonum.Implementation

// chunking splits n rows into nc chunks of at least max(chunkRows, p) rows
// each (one chunk when n is smaller).
type chunking struct {
	n, nc int
}

func newChunking(n, p int) chunking {
	size := chunkRows
	if size < 2*p {
		size = 2 * p
	}
	nc := n / size
	if nc < 1 {
		nc = 1
	}
	return chunking{n: n, nc: nc}
}

// bounds returns the rows [lo, hi) of chunk c.
func (ch chunking) bounds(c int) (lo, hi int) {
	return c * ch.n / ch.nc, (c + 1) * ch.n / ch.nc
}

// run calls fn(c) for every chunk, on up to GOMAXPROCS goroutines when the
// problem is large, and returns when all calls have returned. Results that
// fn stores per chunk are combined by the caller in chunk order, so the
// outcome does not depend on the number of goroutines.
func (ch chunking) run(fn func(c int)) {
	workers := runtime.GOMAXPROCS(0)
	if workers > ch.nc {
		workers = ch.nc
	}
	if ch.n < parallelRows || workers <= 1 {
		for c := 0; c < ch.nc; c++ {
			fn(c)
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Go(func() {
			for {
				c := int(next.Add(1) - 1)
				if c >= ch.nc {
					return
				}
				fn(c)
			}
		})
	}
	wg.Wait()
}

// alloc calls every fn, concurrently when the problem is large enough to
// run in parallel: for allocating large outputs, which Go zeroes on the
// allocating goroutine.
func (ch chunking) alloc(fns ...func()) {
	if ch.n < parallelRows || runtime.GOMAXPROCS(0) <= 1 {
		for _, fn := range fns {
			fn()
		}
		return
	}
	var wg sync.WaitGroup
	for _, fn := range fns[1:] {
		wg.Go(fn)
	}
	fns[0]()
	wg.Wait()
}
