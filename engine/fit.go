package engine

import (
	"fmt"
	"math"
	"strings"
	"sync"

	"gonum.org/v1/gonum/mat"
)

// Coefficient is one estimated coefficient with its standard error, t
// statistic (Estimate/StdError), two-sided p-value on DF degrees of freedom
// and 95% confidence interval Estimate ± t(0.975, DF)·StdError.
type Coefficient struct {
	Term     string
	Estimate float64
	StdError float64
	T        float64
	P        float64
	Lower95  float64
	Upper95  float64
}

// Fit is an ordinary least-squares fit of y on X.
//
// With an intercept, TSS = Σ(y-ȳ)² and RSquared = 1 - RSS/TSS; without
// one, TSS = Σy² (uncentred, as for the NIST StRD no-intercept data) and R²
// is uncentred too. AdjRSquared = 1 - (1-R²)(n-k)/(n-p) with k = 1 with an
// intercept, 0 without. The overall F test compares the model with the
// intercept-only model (with an intercept: FDF1 = p-1) or with the empty
// model (without: FDF1 = p); FStat and FP are NaN when there is nothing to
// test. Condition is the 2-norm condition number of the design after
// centring (with an intercept) and scaling each column to unit length.
// VIF holds each non-intercept term's variance inflation factor (centred
// with an intercept, uncentred without), nil with fewer than two such terms.
//
// When the fit is exact (RSS = 0) Sigma and the standard errors are 0 and
// the t statistics are ±Inf.
//
// The fit keeps references to X and y (no copy); the caller must not
// change them while the fit is in use. For each derived term (x^3 when x
// is a term too) it also keeps the low parts of its exact values, 8n
// bytes a term. Condition is measured on the double-double factor when
// it is above 1e4 (the extended route, package documentation). A Fit is
// safe for concurrent reads.
type Fit struct {
	Model       Model
	N, P        int
	Coef        []Coefficient
	Sigma       float64
	DF          int
	RSS, TSS    float64
	RSquared    float64
	AdjRSquared float64
	FStat, FP   float64
	FDF1, FDF2  int
	Condition   float64
	VIF         map[string]float64
	Residuals   []float64
	Fitted      []float64
	// Weights holds the row weights of a weighted fit (RefitWeighted),
	// nil for an unweighted one.
	Weights []float64

	sw []float64 // √Weights, nil when unweighted

	x   *mat.Dense
	y   []float64
	sc  scaling
	r   []float64 // p x p upper triangular R of the scaled design, row-major
	ri  []float64 // R^-1, row-major
	m   []float64 // M = T^-1 R^-1, row-major: (X'X)^-1 = M M'
	rss dd        // RSS in double-double
	bl  []float64 // low parts of the coefficients: b = Estimate + bl

	der []*derivedTerm // per column, how a derived column follows from others
	lo  [][]float64    // low parts of derived columns (nil: none)
	ext *extFactors    // double-double factors (nil on the binary64 route)
}

// Limits used by Refit.
const (
	// rankTol: a scaled column whose distance from the span of the
	// columns before it is below rankTol is collinear with them.
	rankTol = 1e-13
	// maxCondition: a scaled design with a larger condition number is
	// refused with ErrIllConditioned: up to it every field is promised to
	// 1e-9 relative (package documentation, "Accuracy").
	maxCondition = 1e10
	// maxRefine bounds the refinement steps.
	maxRefine = 10
	// seminormalCond: up to this condition number of the scaled design
	// the fit is refined on the corrected seminormal equations with the
	// binary64 R and its diagnostics are computed in binary64; above it,
	// R is computed again in double-double (factorExt) and the fit and
	// its diagnostics are computed with it (the extended route).
	seminormalCond = 1e4
)

// scaling maps the design X to the scaled design W = X T^-1 whose columns
// are centred (with an intercept) and of unit length:
// w_ij = (x_ij - mean_j)/scale_j, mean_0 = 0 and scale_0 = √n for the
// intercept column. T = D·[[1, mean'], [0, I]] with D = diag(scale).
type scaling struct {
	p         int
	intercept bool
	mean      []float64
	scale     []float64
}

// toW returns w = T^-T x for a design row x.
func (s *scaling) toW(w, x []float64) {
	if s.intercept {
		w[0] = x[0] / s.scale[0]
		for j := 1; j < s.p; j++ {
			w[j] = (x[j] - s.mean[j]*x[0]) / s.scale[j]
		}
		return
	}
	for j := 0; j < s.p; j++ {
		w[j] = x[j] / s.scale[j]
	}
}

// fromW returns b = T^-1 c (b and c may not alias).
func (s *scaling) fromW(b, c []float64) {
	if s.intercept {
		b0 := c[0] / s.scale[0]
		for j := 1; j < s.p; j++ {
			b[j] = c[j] / s.scale[j]
			b0 -= s.mean[j] * b[j]
		}
		b[0] = b0
		return
	}
	for j := 0; j < s.p; j++ {
		b[j] = c[j] / s.scale[j]
	}
}

// Refit fits y = Xb + e by least squares. X is the design built by
// m.Design (column 0 all ones when m.Intercept). The method:
//
//   - one pass over the data checks every value and, per chunk of rows,
//     centres each non-intercept column on a provisional centre (the mean
//     of the first chunk; exact centring is not needed because the
//     refinement works against the original X), prescales by powers of
//     two, and computes a Householder QR of the chunk;
//   - the stacked chunk R factors are factored again (TSQR); the columns
//     of the resulting R are scaled to unit length, W = X T^-1;
//   - a derived term (x^3 when x is a term too, x^9*x, x*z) is taken at
//     its exact value, the product of its factors in double-double, not
//     at its rounding in X (see derivations);
//   - never the normal equations X'X: the QR solution b0 is refined with
//     residuals and X'r accumulated in extended precision (compensated
//     products and sums) against the original X, on the corrected
//     seminormal equations R'R dc = W'(y - Xb) (Björck 1987). A
//     well-conditioned design (scaled condition number at most
//     seminormalCond, the usual case) is refined with the binary64 R
//     until the predicted next correction is below rounding level, and
//     keeps the last correction unrounded (Fit's coefficients are then
//     known to about twice double precision); a worse-conditioned one
//     takes the extended route: R again in double-double by one more
//     pass over the rows (factorExt), the refinement in double-double
//     (refineExt), and (X'X)^-1, the standard errors and, in Diagnose,
//     every row's leverage and (X'X)^-1 x_i in double-double.
//
// Large problems are split over up to GOMAXPROCS goroutines inside the
// call; results do not depend on their number.
//
// Errors: ErrTooFewRows when n <= p; *DataError wrapping ErrNonFinite;
// ErrZeroResponse; *ColumnError wrapping ErrConstantColumn for a constant
// term (or response, with an intercept); *CollinearError when a scaled
// column lies within 1e-13 of the span of the columns before it; and, when
// the scaled design has condition number above 1e10 (the limit of the
// accuracy promise in the package documentation), an error wrapping both
// ErrIllConditioned and the mat.Condition value, naming the terms
// involved. A shape mismatch between m, X and y, or an intercept column
// that is not all ones, is a caller bug and panics.
func Refit(m Model, X *mat.Dense, y []float64) (*Fit, error) {
	return refit(m, X, y, nil)
}

func refit(m Model, X *mat.Dense, y, wt []float64) (*Fit, error) {
	n, p := X.Dims()
	if p != m.P() {
		panic(fmt.Sprintf("engine: Refit: X has %d columns, model has %d coefficients", p, m.P()))
	}
	if len(y) != n {
		panic(fmt.Sprintf("engine: Refit: X has %d rows, y has %d values", n, len(y)))
	}
	if n <= p {
		return nil, fmt.Errorf("%w: %d rows, %d coefficients", ErrTooFewRows, n, p)
	}
	names := m.Names()
	raw := X.RawMatrix()
	ws := &work{m: m, n: n, p: p, k: p + 1, xd: raw.Data, stride: raw.Stride, y: y, ch: newChunking(n, p), nw: float64(n)}
	var sw []float64
	if wt != nil {
		// Weighted (weights.go): every row of [X y] is multiplied by √w_i
		// in the QR pass and the refinement works on X'W(y - Xb).
		ws.wt, sw = wt, sqrtWeights(wt)
		ws.sw = sw
		ws.nw = sumDD(wt)
	}
	if err := ws.factor(); err != nil {
		return nil, err
	}
	ch, sc := ws.ch, &ws.sc
	R := ws.R
	if err := checkRank(R, p, names); err != nil {
		return nil, err
	}
	cond := conditionUpper(R, p)
	// The binary64 estimate is within about κ·eps of the true value: far
	// above the limit, refuse without the double-double pass.
	if cond > 2*maxCondition || math.IsNaN(cond) {
		return nil, illConditioned(R, p, cond, names)
	}
	if wt == nil {
		ws.der = derivations(m)
		ws.lo = designLo(ws.der, ws.xd, ws.stride, n, p)
	}
	fitted := make([]float64, n)
	var b, bl, db []float64
	var ext *extFactors
	// Weighted fits take the design as given (no derived term gets low
	// parts: der and lo stay nil), weight their rows inside the
	// refinements and factorExt, and keep the refined coefficients
	// unrounded (bl) for the residuals (weightedFinal) and Predict.
	if cond <= seminormalCond {
		b, bl, db = ws.refineSemi(cond, fitted)
	} else {
		ext = ws.factorExt()
		if ext == nil {
			return nil, illConditioned(R, p, math.Inf(1), names)
		}
		if ext.cond > maxCondition || math.IsNaN(ext.cond) {
			return nil, illConditioned(roundDD(ext.r), p, ext.cond, names)
		}
		cond = ext.cond
		b0, c0 := ws.start()
		b, bl = ws.refineExt(ext, b0, c0, fitted)
	}
	ws.S = nil

	// Final pass: residuals, fitted values, RSS in double-double, TSS.
	xd, stride := ws.xd, ws.stride
	f0 := fitted // holds the remainders of the last refinement step
	res := ws.r
	rssPart := make([]dd, ch.nc)
	tssPart := make([]float64, 2*ch.nc)
	ybar := ws.ybar
	lo := ws.lo
	final := func(c int) {
		lo0, hi := ch.bounds(c)
		var rs, rc float64
		var t1, t2 float64
		for i := lo0; i < hi; i++ {
			row := xd[i*stride : i*stride+p]
			var e float64
			if ext == nil {
				// r0 + f0 = y - X(b - db) to double-double accuracy
				// and b + bl = (b - db) + db, so e = r0 + (f0 - x·db):
				// the small terms in double, then one rounding.
				t := f0[i]
				for j, v := range row {
					t = math.FMA(-v, db[j], t)
				}
				e = res[i] + t
			} else {
				s, c := residualExt(y[i], row, lo, i, b, bl)
				e = s + c
			}
			res[i] = e
			fitted[i] = y[i] - e
			q := e * e
			qe := math.FMA(e, e, -q)
			var se float64
			rs, se = twoSum(rs, q)
			rc += se + qe
			d := y[i]
			if m.Intercept {
				d -= ybar
			}
			t1 += d
			t2 += d * d
		}
		rssPart[c] = dd{rs, 0}.add(rc)
		tssPart[2*c], tssPart[2*c+1] = t1, t2
	}
	if wt != nil {
		final = func(c int) {
			lo0, hi := ch.bounds(c)
			rssPart[c], tssPart[2*c], tssPart[2*c+1] = weightedFinal(xd[lo0*stride:], stride, p, y[lo0:hi], wt[lo0:hi], b, bl, res[lo0:hi], fitted[lo0:hi], m.Intercept, ybar)
		}
	}
	ch.run(final)
	var rss dd
	t1, t2 := 0.0, 0.0
	for c := 0; c < ch.nc; c++ {
		rss = rss.addDD(rssPart[c])
		t1 += tssPart[2*c]
		t2 += tssPart[2*c+1]
	}
	tss := t2
	if m.Intercept {
		tss = t2 - t1*t1/ws.nw
	}

	f := &Fit{
		Model: m, N: n, P: p, DF: n - p,
		RSS: rss.float(), TSS: tss,
		Condition: cond,
		Residuals: res, Fitted: fitted,
		x: X, y: y, sc: *sc, r: R, rss: rss, bl: bl,
		der: ws.der, lo: lo, ext: ext,
		Weights: wt, sw: sw,
	}
	f.finish(b, names, ws.ssCentred)
	if !f.finite() {
		return nil, fmt.Errorf("%w: the fit overflows double precision (values too large)", ErrNonFinite)
	}
	return f, nil
}

// residual2 returns y - rr - x·b rounded to double, accumulated with the
// compensated dot product of Ogita, Rump & Oishi (2005) "Dot2": as
// accurate as double-double accumulation, then rounded once.
func residual2(y, rr float64, x, b []float64) float64 {
	s, c := residualDD(y, rr, x, b)
	return s + c
}

// residualDD returns y - rr - x·b as an unevaluated sum s + c (Dot2, with
// two interleaved chains for instruction-level parallelism, joined by an
// error-free sum).
func residualDD(y, rr float64, x, b []float64) (s, c float64) {
	s1, c1 := twoSum(y, -rr)
	var s2, c2 float64
	b = b[:len(x)]
	j := 0
	for ; j+2 <= len(x); j += 2 {
		q1 := -x[j] * b[j]
		e1 := math.FMA(-x[j], b[j], -q1)
		q2 := -x[j+1] * b[j+1]
		e2 := math.FMA(-x[j+1], b[j+1], -q2)
		var t1, t2 float64
		s1, t1 = twoSum(s1, q1)
		s2, t2 = twoSum(s2, q2)
		c1 += t1 + e1
		c2 += t2 + e2
	}
	if j < len(x) {
		q1 := -x[j] * b[j]
		e1 := math.FMA(-x[j], b[j], -q1)
		var t1 float64
		s1, t1 = twoSum(s1, q1)
		c1 += t1 + e1
	}
	s, e := twoSum(s1, s2)
	return s, c1 + c2 + e
}

// work holds the state of one Refit: the chunked Householder factors of
// the centred design and the refinement vectors.
type work struct {
	m         Model
	n, p, k   int
	xd        []float64
	stride    int
	y         []float64
	ch        chunking
	sc        scaling
	ybar      float64
	ssCentred []float64 // Σ(x_j - x̄_j)², for the VIF

	taus []float64 // per chunk reflector scalars
	S    []float64 // stacked chunk R factors (nc·p x k), column-major
	tauS []float64
	R    []float64 // scaled R, p x p row-major
	pre  []float64 // power-of-two prescale per column (y last)
	r    []float64 // residual iterate

	der []*derivedTerm // per column, how a derived column follows from others
	lo  [][]float64    // low parts of derived columns (nil: none)

	wt, sw []float64 // row weights and their square roots (nil unweighted)
	nw     float64   // Σ w (n unweighted)
}

type chunkStat struct {
	sum        []float64 // Σ(x - c) per column, y last
	min, max   []float64 // per column, y last
	badRow     int
	badCol     int
	badOne     bool
	nonFiniteR bool
}

// factor runs one pass over the data: it checks values, centres each
// column on a provisional centre (the mean of the first chunk), prescales
// by powers of two, and factors every chunk; then merges the chunk factors.
func (w *work) factor() error {
	n, p, k := w.n, w.p, w.k
	m := w.m
	names := m.Names()
	w.sc = scaling{p: p, intercept: m.Intercept, mean: make([]float64, p), scale: make([]float64, p)}
	cen := make([]float64, k) // centring constants, y last (y is not centred)
	w.pre = make([]float64, k)
	lo0, hi0 := w.ch.bounds(0)
	w.provisional(lo0, hi0, cen)
	for j := 0; j < p; j++ {
		w.sc.mean[j] = cen[j]
	}
	stats := w.qrPass(cen)
	// Combine the checks.
	sum := make([]float64, k)
	mn := make([]float64, k)
	mx := make([]float64, k)
	for j := range mn {
		mn[j], mx[j] = math.Inf(1), math.Inf(-1)
	}
	badRow, badCol := -1, 0
	nonFinite := false
	for _, st := range stats {
		if st.badOne {
			panic("engine: Refit: model has an intercept but column 0 of X is not all ones")
		}
		if st.badRow >= 0 && badRow < 0 {
			badRow, badCol = st.badRow, st.badCol
		}
		nonFinite = nonFinite || st.nonFiniteR
		for j := 0; j < k; j++ {
			sum[j] += st.sum[j]
			mn[j] = math.Min(mn[j], st.min[j])
			mx[j] = math.Max(mx[j], st.max[j])
		}
	}
	if badRow >= 0 {
		col := m.Response
		if badCol < p {
			col = names[badCol]
		}
		return &DataError{Row: badRow, Column: col, Err: ErrNonFinite}
	}
	if mn[p] == 0 && mx[p] == 0 {
		return ErrZeroResponse
	}
	first := 0
	if m.Intercept {
		first = 1
	}
	for j := first; j < p; j++ {
		if mn[j] == mx[j] && (m.Intercept || mn[j] == 0) {
			return &ColumnError{Term: names[j], Err: ErrConstantColumn}
		}
	}
	if m.Intercept && mn[p] == mx[p] {
		return &ColumnError{Term: m.Response, Err: ErrConstantColumn}
	}
	if nonFinite || !allFinite(w.S) {
		// Values far larger than those of the first chunk overflowed the
		// prescaled sums of squares: redo with the global ranges.
		big := make([]float64, k)
		for i := 0; i < n; i++ {
			row := w.xd[i*w.stride : i*w.stride+p]
			for j, v := range row {
				big[j] = math.Max(big[j], math.Abs(v-cen[j]))
			}
			big[p] = math.Max(big[p], math.Abs(w.y[i]-cen[p]))
		}
		for j := 0; j < k; j++ {
			w.pre[j] = pow2Inv(big[j])
		}
		w.qrPass(cen)
		if !allFinite(w.S) {
			return fmt.Errorf("%w: the design overflows double precision (values too large)", ErrNonFinite)
		}
	}
	w.ybar = cen[p] + sum[p]/w.nw

	w.tauS = make([]float64, p)
	sm := w.ch.nc * p
	houseQR(w.S, sm, p, k, w.tauS)
	colNorm := make([]float64, p)
	w.ssCentred = make([]float64, p)
	for j := 0; j < p; j++ {
		ss := 0.0
		for i := 0; i <= j; i++ {
			ss += w.S[j*sm+i] * w.S[j*sm+i]
		}
		colNorm[j] = math.Sqrt(ss)
		w.sc.scale[j] = colNorm[j] / w.pre[j]
		if colNorm[j] == 0 || math.IsInf(w.sc.scale[j], 0) {
			return &ColumnError{Term: names[j], Err: ErrConstantColumn}
		}
		// Σ(x - x̄)² = Σ(x - c)² - (Σ(x - c))²/n.
		s2 := w.sc.scale[j] * w.sc.scale[j]
		w.ssCentred[j] = s2 - sum[j]*sum[j]/w.nw
	}
	w.R = make([]float64, p*p)
	for i := 0; i < p; i++ {
		for j := i; j < p; j++ {
			w.R[i*p+j] = w.S[j*sm+i] / colNorm[j]
		}
	}
	return nil
}

// provisional sets the centring constants (the mean of the finite values
// of the first chunk; 0 without an intercept and for y) and the prescales.
func (w *work) provisional(lo, hi int, cen []float64) {
	p := w.p
	mx := make([]float64, w.k)
	for j := 1; j < p && w.m.Intercept; j++ {
		s, cnt := 0.0, 0
		for i := lo; i < hi; i++ {
			v := w.xd[i*w.stride+j]
			if v-v == 0 {
				s += v * 0x1p-64
				cnt++
			}
		}
		if cnt > 0 {
			cen[j] = s / float64(cnt) * 0x1p64
		}
	}
	for i := lo; i < hi; i++ {
		row := w.xd[i*w.stride : i*w.stride+p]
		for j, v := range row {
			if d := math.Abs(v - cen[j]); d > mx[j] && d-d == 0 {
				mx[j] = d
			}
		}
		if d := math.Abs(w.y[i]); d > mx[p] && d-d == 0 {
			mx[p] = d
		}
	}
	for j := range mx {
		w.pre[j] = pow2Inv(mx[j])
	}
}

// qrPass copies, checks and factors every chunk, and stacks the chunk R
// factors into S.
func (w *work) qrPass(cen []float64) []chunkStat {
	p, k := w.p, w.k
	ch := w.ch
	if w.S == nil {
		w.taus = make([]float64, ch.nc*p)
		w.S = make([]float64, ch.nc*p*k)
	}
	sm := ch.nc * p
	stats := make([]chunkStat, ch.nc)
	intercept := w.m.Intercept
	pre := w.pre
	ch.run(func(c int) {
		lo, hi := ch.bounds(c)
		mr := hi - lo
		sp := qrScratch.Get().(*[]float64)
		if cap(*sp) < mr*k {
			*sp = make([]float64, mr*k)
		}
		a := (*sp)[:mr*k]
		defer qrScratch.Put(sp)
		st := chunkStat{sum: make([]float64, k), min: make([]float64, k), max: make([]float64, k), badRow: -1}
		for j := range st.min {
			st.min[j] = math.Inf(1)
			st.max[j] = math.Inf(-1)
		}
		// X columns: a non-finite value turns bad[j] into NaN (v*0), and
		// a column is constant in the chunk when no value differs from the
		// first; the offending row is looked up only when needed.
		// Column by column, so that the accumulators stay in registers.
		bad := make([]float64, p)
		first := w.xd[lo*w.stride : lo*w.stride+p]
		differs := make([]bool, p)
		for j := 0; j < p; j++ {
			col := a[j*mr : (j+1)*mr]
			cj, pj, fj := cen[j], pre[j], first[j]
			var b0, b1, s0, s1 float64
			diff := false
			x := w.xd[lo*w.stride+j:]
			stride := w.stride
			if w.sw != nil {
				// Weighted (weights.go).
				bad[j], st.sum[j], differs[j] = weightedColumn(col, x, stride, w.wt[lo:hi], w.sw[lo:hi], cj, pj, fj)
				if j == 0 && intercept && (differs[j] || fj != 1) {
					st.badOne = true
				}
				continue
			}
			ii := 0
			for ; ii+2 <= mr; ii += 2 {
				v0, v1 := x[ii*stride], x[(ii+1)*stride]
				b0 += v0 * 0
				b1 += v1 * 0
				if v0 != fj || v1 != fj {
					diff = true
				}
				d0, d1 := v0-cj, v1-cj
				s0 += d0
				s1 += d1
				col[ii] = d0 * pj
				col[ii+1] = d1 * pj
			}
			if ii < mr {
				v0 := x[ii*stride]
				b0 += v0 * 0
				diff = diff || v0 != fj
				d0 := v0 - cj
				s0 += d0
				col[ii] = d0 * pj
			}
			bad[j] = b0 + b1
			st.sum[j] = s0 + s1
			differs[j] = diff
			if j == 0 && intercept && (diff || fj != 1) {
				st.badOne = true
			}
		}
		if w.sw != nil {
			weightedResponse(&st, a[p*mr:(p+1)*mr], w.y[lo:hi], w.wt[lo:hi], w.sw[lo:hi], cen[p], pre[p], p, lo)
		}
		yhi := hi
		if w.sw != nil {
			yhi = lo // done above
		}
		for i := lo; i < yhi; i++ {
			ii := i - lo
			v := w.y[i]
			if v-v != 0 {
				if st.badRow < 0 {
					st.badRow, st.badCol = i, p
				}
			} else {
				if v < st.min[p] {
					st.min[p] = v
				}
				if v > st.max[p] {
					st.max[p] = v
				}
			}
			st.sum[p] += v - cen[p]
			a[p*mr+ii] = v * pre[p]
		}
		for j := 0; j < p; j++ {
			if bad[j] != 0 {
				for i := lo; i < hi; i++ {
					if v := w.xd[i*w.stride+j]; v-v != 0 {
						if st.badRow < 0 || i < st.badRow || (i == st.badRow && j < st.badCol) {
							st.badRow, st.badCol = i, j
						}
						break
					}
				}
			}
			// min/max stand for "constant in this chunk" from here on.
			st.min[j], st.max[j] = first[j], first[j]
			if differs[j] {
				st.max[j] = math.Inf(1)
			}
		}
		if st.badRow < 0 {
			houseQR(a, mr, p, k, w.taus[c*p:(c+1)*p])
		}
		for j := 0; j < k; j++ {
			top := j + 1
			if top > p {
				top = p
			}
			for i := 0; i < top; i++ {
				w.S[j*sm+c*p+i] = a[j*mr+i]
			}
			for i := top; i < p; i++ {
				w.S[j*sm+c*p+i] = 0
			}
		}
		stats[c] = st
	})
	return stats
}

// qrScratch holds the chunk blocks of qrPass.
var qrScratch = sync.Pool{New: func() any { return new([]float64) }}

func allFinite(v []float64) bool {
	for _, x := range v {
		if x-x != 0 {
			return false
		}
	}
	return true
}

// converged applies the correction (b += db, cvec += dc, the scaled
// coefficients) of step it and reports whether to stop: the correction is
// at rounding level, no longer shrinks by half, or the next one, predicted
// by the contraction rho (raised to the observed ratio), is below it.
// prev carries the relative size of the last correction.
func (w *work) converged(b, db, cvec, dc []float64, rho, prev *float64, it int) bool {
	const eps = 0x1p-52
	p := w.p
	cmax := 0.0
	for j := 0; j < p; j++ {
		b[j] += db[j]
		cvec[j] += dc[j]
		cmax = math.Max(cmax, math.Abs(cvec[j]))
	}
	// Componentwise relative size of the correction, and the
	// normwise size over the smallest component.
	nd, n2, cmin := 0.0, 0.0, math.Inf(1)
	for j := 0; j < p; j++ {
		den := math.Max(math.Abs(cvec[j]), eps*cmax)
		nd = math.Max(nd, math.Abs(dc[j])/den)
		n2 += dc[j] * dc[j]
		cmin = math.Min(cmin, den)
	}
	if nd <= eps || math.IsNaN(nd) {
		return true
	}
	if it > 0 {
		ratio := nd / *prev
		if ratio > 0.5 {
			return true // no further progress
		}
		*rho = math.Max(*rho, ratio)
	}
	// Stop when the next correction is predicted below rounding level.
	if *rho*math.Sqrt(n2)/cmin <= eps/2 {
		return true
	}
	*prev = nd
	return false
}

// start returns the QR solution b0 and its coefficients c0 in the scaled
// design (from the merged factors: R c0 = the top of Q'y).
func (w *work) start() (b, c []float64) {
	p := w.p
	sm := w.ch.nc * p
	c = make([]float64, p)
	for i := 0; i < p; i++ {
		c[i] = w.S[p*sm+i] / w.pre[p]
	}
	solveUpper(w.R, p, c)
	b = make([]float64, p)
	w.sc.fromW(b, c)
	return b, c
}

// xtr sets, for the rows of x (row-major with the given stride, p columns
// used) against r and f (one value a row), gs + gc = X'r in double-double
// and gf = X'f in double: column by column, with two interleaved
// accumulators held in registers.
func xtr(x []float64, stride, p int, r, f, gs, gc, gf []float64) {
	f = f[:len(r)]
	for j := 0; j < p; j++ {
		x := x[j:]
		var s0, c0, s1, c1, u0, u1 float64
		i := 0
		for ; i+2 <= len(r); i += 2 {
			v0, v1 := x[i*stride], x[(i+1)*stride]
			q0, q1 := v0*r[i], v1*r[i+1]
			e0, e1 := math.FMA(v0, r[i], -q0), math.FMA(v1, r[i+1], -q1)
			var t0, t1 float64
			s0, t0 = twoSum(s0, q0)
			s1, t1 = twoSum(s1, q1)
			c0 += t0 + e0
			c1 += t1 + e1
			u0 += v0 * f[i]
			u1 += v1 * f[i+1]
		}
		if i < len(r) {
			v0 := x[i*stride]
			q0 := v0 * r[i]
			e0 := math.FMA(v0, r[i], -q0)
			var t0 float64
			s0, t0 = twoSum(s0, q0)
			c0 += t0 + e0
			u0 += v0 * f[i]
		}
		var t float64
		gs[j], t = twoSum(s0, s1)
		gc[j] = c0 + c1 + t
		gf[j] = u0 + u1
	}
}

// refineSemi returns the least-squares coefficients, refined on the
// corrected seminormal equations (Björck 1987): from b0 of the QR
// factors, each step computes r + f = y - Xb to double-double accuracy
// (r rounded, f the rest), g = X'(r + f) with X'r in extended precision,
// and the correction T^-1 R^-1 R^-T T^-T g, which needs R only. X
// includes the low parts of derived columns (w.lo). A step contracts the
// error by about κ² eps, so it serves well-conditioned designs
// (κ <= seminormalCond). It stops when the correction is at rounding
// level, no longer shrinks by half, or the next one is predicted below it.
//
// It returns b, the low parts bl of the refined solution (b + bl is the
// last iterate plus its correction, unrounded) and the last correction
// db; w.r and f0 then hold r and f for b + bl - db, so that the residuals
// of b + bl are r + (f - X db).
func (w *work) refineSemi(cond float64, f0 []float64) (b, bl, db []float64) {
	n, p := w.n, w.p
	ch, sc, R := w.ch, &w.sc, w.R
	xd, stride, y := w.xd, w.stride, w.y

	b, cvec := w.start()
	db = make([]float64, p)
	bl = make([]float64, p)
	bprev := make([]float64, p)

	w.r = make([]float64, n)
	r := w.r
	lo := w.lo
	// Per chunk and column: X'r as s + c, then X'f.
	gpart := make([]float64, 3*ch.nc*p)
	dc := make([]float64, p)
	const eps = 0x1p-52
	rho := 16 * float64(p) * cond * cond * eps
	prev := math.Inf(1)
	for it := 0; it < maxRefine; it++ {
		bb := b
		ch.run(func(c int) {
			lo0, hi := ch.bounds(c)
			for i := lo0; i < hi; i++ {
				row := xd[i*stride : i*stride+p]
				s1, c1 := residualDD(y[i], 0, row, bb)
				ri := s1 + c1
				r[i] = ri
				f0[i] = (s1 - ri) + c1
			}
			if lo != nil {
				// Derived columns: subtract lo·b, and round again.
				for i := lo0; i < hi; i++ {
					c1 := f0[i]
					for j, l := range lo {
						if l != nil {
							c1 -= l[i] * bb[j]
						}
					}
					ri := r[i] + c1
					f0[i] = (r[i] - ri) + c1
					r[i] = ri
				}
			}
			if wt := w.wt; wt != nil {
				// Weighted (weights.go): r + f = w (y - x'b), for
				// X'W(y - Xb).
				for i := lo0; i < hi; i++ {
					wi, ri := wt[i], r[i]
					pr := wi * ri
					f0[i] = math.FMA(wi, ri, -pr) + wi*f0[i]
					r[i] = pr
				}
			}
			gs := gpart[3*c*p : (3*c+1)*p]
			gc := gpart[(3*c+1)*p : (3*c+2)*p]
			gf := gpart[(3*c+2)*p : (3*c+3)*p]
			xtr(xd[lo0*stride:], stride, p, r[lo0:hi], f0[lo0:hi], gs, gc, gf)
			for j, l := range lo {
				if l != nil {
					gf[j] += dot(l[lo0:hi], r[lo0:hi])
				}
			}
		})
		// g = X'(r + f), gW = T^-T g, dc = R^-1 R^-T gW.
		g := make([]dd, p)
		for c := 0; c < ch.nc; c++ {
			for j := 0; j < p; j++ {
				g[j] = g[j].add(gpart[3*c*p+j]).add(gpart[(3*c+1)*p+j]).add(gpart[(3*c+2)*p+j])
			}
		}
		for j := 0; j < p; j++ {
			v := g[j]
			if sc.intercept && j > 0 {
				v = v.addDD(g[0].mulDD(dd{-sc.mean[j], 0}))
			}
			dc[j] = v.float() / sc.scale[j]
		}
		solveUpperT(R, p, dc)
		solveUpper(R, p, dc)
		sc.fromW(db, dc)
		copy(bprev, b)
		if w.converged(b, db, cvec, dc, &rho, &prev, it) {
			break
		}
	}
	for j := range b {
		b[j], bl[j] = twoSum(bprev[j], db[j])
	}
	return b, bl, db
}

// finish computes the inverse factors, coefficient table and summary
// statistics from the refined coefficients b.
func (f *Fit) finish(b []float64, names []string, ssCentred []float64) {
	p, n := f.P, f.N
	var ri, M []float64
	if e := f.ext; e != nil {
		f.r = roundDD(e.r)
		ri = roundDD(e.ri)
		M = roundDD(e.m)
	} else {
		ri = invertUpper(f.r, p)
		// M = T^-1 R^-1.
		M = make([]float64, p*p)
		for j := 0; j < p; j++ {
			for l := 0; l < p; l++ {
				M[j*p+l] = ri[j*p+l] / f.sc.scale[j]
			}
		}
		if f.sc.intercept {
			for j := 1; j < p; j++ {
				for l := 0; l < p; l++ {
					M[l] -= f.sc.mean[j] * M[j*p+l]
				}
			}
		}
	}
	f.ri = ri
	f.m = M
	df := float64(f.DF)
	f.Sigma = math.Sqrt(f.RSS / df)
	tq := -TQuantile(0.025, df)
	f.Coef = make([]Coefficient, p)
	for j := 0; j < p; j++ {
		cjj := 0.0
		if f.ext != nil {
			cjj = f.ext.unscaled(j, j).float()
		} else {
			for l := j; l < p; l++ {
				cjj += M[j*p+l] * M[j*p+l]
			}
		}
		se := f.Sigma * math.Sqrt(cjj)
		t := b[j] / se
		f.Coef[j] = Coefficient{
			Term: names[j], Estimate: b[j], StdError: se, T: t, P: TTail2(t, df),
			Lower95: b[j] - tq*se, Upper95: b[j] + tq*se,
		}
	}
	k := 0.0
	if f.Model.Intercept {
		k = 1
	}
	if f.TSS > 0 {
		f.RSquared = 1 - f.RSS/f.TSS
	} else {
		f.RSquared = math.NaN()
	}
	f.AdjRSquared = 1 - (1-f.RSquared)*(float64(n)-k)/df
	f.FDF1 = p - int(k)
	f.FDF2 = f.DF
	f.FStat, f.FP = math.NaN(), math.NaN()
	if f.FDF1 > 0 {
		f.FStat = ((f.TSS - f.RSS) / float64(f.FDF1)) / (f.RSS / df)
		f.FP = FSurvival(f.FStat, float64(f.FDF1), df)
		if f.RSS == 0 {
			f.FStat, f.FP = math.Inf(1), 0
		}
	} else {
		f.FDF1 = 0
	}
	first := int(k)
	if p-first >= 2 {
		f.VIF = make(map[string]float64, p-first)
		for j := first; j < p; j++ {
			g := 0.0
			if e := f.ext; e != nil {
				var s dd
				for l := j; l < p; l++ {
					s = s.addDD(e.ri[j*p+l].mulDD(e.ri[j*p+l]))
				}
				g = s.float()
			} else {
				for l := j; l < p; l++ {
					g += ri[j*p+l] * ri[j*p+l]
				}
			}
			if f.Model.Intercept {
				// W is centred on a provisional centre; rescale to the
				// exactly centred column: VIF = C_jj Σ(x - x̄)² with
				// C_jj = G_jj/scale_j².
				g *= ssCentred[j] / (f.sc.scale[j] * f.sc.scale[j])
			}
			f.VIF[names[j]] = g
		}
	}
}

// X returns the design the fit was computed from.
func (f *Fit) X() *mat.Dense { return f.x }

// Y returns the response the fit was computed from.
func (f *Fit) Y() []float64 { return f.y }

// Unscaled returns (X'X)^-1, computed as (T^-1 R^-1)(T^-1 R^-1)' from the
// factors of the scaled design (in double-double on the extended route,
// see the package documentation). Multiply by Sigma² for the covariance
// of the estimates.
func (f *Fit) Unscaled() *mat.SymDense {
	p := f.P
	c := mat.NewSymDense(p, nil)
	for i := 0; i < p; i++ {
		for j := i; j < p; j++ {
			if f.ext != nil {
				c.SetSym(i, j, f.ext.unscaled(i, j).float())
				continue
			}
			s := 0.0
			for l := j; l < p; l++ {
				s += f.m[i*p+l] * f.m[j*p+l]
			}
			c.SetSym(i, j, s)
		}
	}
	return c
}

// Leverage returns x'(X'X)^-1 x for any design row x (length P), computed
// as |R^-T T^-T x|² (in double-double on the extended route, with the
// exact values of derived terms such as x^3 taken from the row's own
// base terms, as for the fit). For a row of X it is that row's hat value
// h_ii. For a weighted fit it is x'(X'WX)^-1 x, and row i's hat value is
// w_i times it (weights.go).
func (f *Fit) Leverage(x []float64) float64 {
	if len(x) != f.P {
		panic(fmt.Sprintf("engine: Leverage: row has length %d, fit has %d coefficients", len(x), f.P))
	}
	if e := f.ext; e != nil {
		lo := make([]float64, f.P)
		if !rowLo(f.der, x, lo) {
			lo = nil
		}
		q := make([]dd, f.P)
		u := make([]dd, f.P)
		h, _ := e.qRow(q, u, x, lo, &f.sc, 1)
		return h
	}
	w := make([]float64, f.P)
	f.sc.toW(w, x)
	if f.lo != nil {
		// The low parts of derived entries (x^2 from the row's x).
		lo := make([]float64, f.P)
		rowLo(f.der, x, lo)
		for j, l := range lo {
			w[j] += l / f.sc.scale[j]
		}
	}
	solveUpperT(f.r, f.P, w)
	h := 0.0
	for _, v := range w {
		h += v * v
	}
	return h
}

// Predict returns the fitted mean at design row x, yhat = x'b, and its
// standard error se = Sigma·sqrt(x'(X'X)^-1 x). yhat is formed in
// double-double from the unrounded coefficients and the exact values of
// the row's derived terms (x^3 from the row's x), then rounded once.
func (f *Fit) Predict(x []float64) (yhat, se float64) {
	if len(x) != f.P {
		panic(fmt.Sprintf("engine: Predict: row has length %d, fit has %d coefficients", len(x), f.P))
	}
	lo := make([]float64, f.P)
	rowLo(f.der, x, lo)
	var acc dd
	t := 0.0
	for j, v := range x {
		acc = acc.addProd(v, f.Coef[j].Estimate)
		t += lo[j] * f.Coef[j].Estimate
		if f.bl != nil {
			t += v * f.bl[j]
		}
	}
	return acc.add(t).float(), f.Sigma * math.Sqrt(f.Leverage(x))
}

// checkRank returns a *CollinearError when a scaled column lies within
// rankTol of the span of the columns before it, naming that column and the
// earlier columns that make up the combination.
func checkRank(R []float64, p int, names []string) error {
	for k := 0; k < p; k++ {
		if math.Abs(R[k*p+k]) >= rankTol {
			continue
		}
		// Solve R[:k,:k] a = R[:k,k].
		a := make([]float64, k)
		for i := 0; i < k; i++ {
			a[i] = R[i*p+k]
		}
		for i := k - 1; i >= 0; i-- {
			s := a[i]
			for j := i + 1; j < k; j++ {
				s -= R[i*p+j] * a[j]
			}
			a[i] = s / R[i*p+i]
		}
		big := 0.0
		for _, v := range a {
			big = math.Max(big, math.Abs(v))
		}
		var terms []string
		for i, v := range a {
			if math.Abs(v) > 1e-8*big {
				terms = append(terms, names[i])
			}
		}
		terms = append(terms, names[k])
		return &CollinearError{Terms: terms}
	}
	return nil
}

// illConditioned returns the error for a scaled design with condition
// number cond (R its triangular factor): ErrIllConditioned and the
// mat.Condition value, and the terms involved, those with a large
// component in the right singular vector of the smallest singular value
// (the near-dependence among the scaled columns).
func illConditioned(R []float64, p int, cond float64, names []string) error {
	var terms []string
	var svd mat.SVD
	if svd.Factorize(mat.NewDense(p, p, append([]float64(nil), R...)), mat.SVDThin) {
		var v mat.Dense
		svd.VTo(&v)
		big := 0.0
		for j := 0; j < p; j++ {
			big = math.Max(big, math.Abs(v.At(j, p-1)))
		}
		for j := 0; j < p; j++ {
			if math.Abs(v.At(j, p-1)) >= 0.1*big {
				terms = append(terms, names[j])
			}
		}
	}
	return fmt.Errorf("%w: %w (limit %.0e); terms involved: %s", ErrIllConditioned, mat.Condition(cond), maxCondition, strings.Join(terms, ", "))
}

// conditionUpper returns the 2-norm condition number of the p x p upper
// triangular R.
func conditionUpper(R []float64, p int) float64 {
	var svd mat.SVD
	if !svd.Factorize(mat.NewDense(p, p, append([]float64(nil), R...)), mat.SVDNone) {
		return math.Inf(1)
	}
	v := svd.Values(nil)
	if v[p-1] == 0 {
		return math.Inf(1)
	}
	return v[0] / v[p-1]
}

// solveUpper overwrites x with R^-1 x.
func solveUpper(R []float64, p int, x []float64) {
	for i := p - 1; i >= 0; i-- {
		s := x[i]
		row := R[i*p : (i+1)*p]
		for j := i + 1; j < p; j++ {
			s -= row[j] * x[j]
		}
		x[i] = s / row[i]
	}
}

// solveUpperT overwrites x with R^-T x.
func solveUpperT(R []float64, p int, x []float64) {
	for i := 0; i < p; i++ {
		s := x[i]
		for j := 0; j < i; j++ {
			s -= R[j*p+i] * x[j]
		}
		x[i] = s / R[i*p+i]
	}
}

// invertUpper returns R^-1 (upper triangular, row-major).
func invertUpper(R []float64, p int) []float64 {
	inv := make([]float64, p*p)
	col := make([]float64, p)
	for j := 0; j < p; j++ {
		for i := range col {
			col[i] = 0
		}
		col[j] = 1
		solveUpper(R, p, col)
		for i := 0; i < p; i++ {
			inv[i*p+j] = col[i]
		}
	}
	return inv
}

// pow2Inv returns the power of two nearest 1/v from below in magnitude
// (1 for v = 0 or non-finite v), so that v*pow2Inv(v) lies in [0.5, 1).
func pow2Inv(v float64) float64 {
	if v == 0 || math.IsInf(v, 0) || math.IsNaN(v) {
		return 1
	}
	_, e := math.Frexp(v)
	return math.Ldexp(1, -e)
}

// finite reports whether the estimates and summary sums are finite.
func (f *Fit) finite() bool {
	ok := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	if !ok(f.RSS) || !ok(f.TSS) || !ok(f.Sigma) {
		return false
	}
	for _, c := range f.Coef {
		if !ok(c.Estimate) || !ok(c.StdError) {
			return false
		}
	}
	for _, v := range f.m {
		if !ok(v) {
			return false
		}
	}
	return true
}
