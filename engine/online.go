package engine

// The online (row-by-row) update.
//
// Online keeps the upper-triangular factor R̃ ((p+1) x (p+1)) of the
// augmented matrix [X y], so that R̃'R̃ = [X y]'[X y]. Its leading p x p
// block is R of X = QR, its last column above the diagonal is Q'y, and the
// square of its last diagonal element is the residual sum of squares. A
// new row [x' y] is folded in by p+1 Givens rotations (O(p²), no refit,
// no normal equations), which keeps the accuracy of a QR fit over long
// streams.
//
// For the new row, with R the updated factor:
//
//	w = R^-T x,  h = w'w = x'(X'X)^-1 x,  v = R^-1 w = (X'X)^-1 x,
//	b = R^-1 Q'y,  e = y - x'b,
//
// and the diagnostics follow the formulas of Diagnose. diag((X'X)^-1),
// needed by DFBETAS, is carried along by the rank-one identity
// C_new,jj = C_old,jj - v_j²/(1 - h) and recomputed exactly from R every
// p rows, so the cost stays O(p²) per row on average.

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Online maintains the least-squares fit of all rows added so far. The
// zero value is not usable; call NewOnline or NewOnlineFrom. An Online is
// not safe for concurrent use.
type Online struct {
	// The state is n, r, diag, diagOK and since (Snapshot and Restore in
	// online_mark.go save and restore exactly these); the rest is scratch.
	p int
	n int
	r []float64 // (p+1) x (p+1) upper triangular, row-major

	diag   []float64 // diag((X'X)^-1), valid when diagOK
	diagOK bool
	since  int // rows added since diag was last computed exactly

	t, w, v, b []float64 // scratch
	dfb        []float64 // DFBETAS of the last Add
	rinv       []float64 // scratch p x p for the exact diagonal
}

// NewOnline returns an empty online fit with p coefficients. p < 1
// panics.
func NewOnline(p int) *Online {
	if p < 1 {
		panic(fmt.Sprintf("engine: NewOnline: p = %d", p))
	}
	q := p + 1
	return &Online{
		p:    p,
		r:    make([]float64, q*q),
		diag: make([]float64, p),
		t:    make([]float64, q),
		w:    make([]float64, p),
		v:    make([]float64, p),
		b:    make([]float64, p),
		dfb:  make([]float64, p),
		rinv: make([]float64, p*p),
	}
}

// NewOnlineFrom returns an online fit of the rows of X and y (a batch to
// start from). Non-finite values give an error wrapping ErrNonFinite; a
// length mismatch panics.
func NewOnlineFrom(X mat.Matrix, y []float64) (*Online, error) {
	n, p := X.Dims()
	if len(y) != n {
		panic(fmt.Sprintf("engine: NewOnlineFrom: X has %d rows, y has %d", n, len(y)))
	}
	o := NewOnline(p)
	row := make([]float64, p)
	for i := 0; i < n; i++ {
		for j := range row {
			row[j] = X.At(i, j)
			if math.IsNaN(row[j]) || math.IsInf(row[j], 0) {
				return nil, &DataError{Row: i, Column: fmt.Sprintf("design column %d", j), Err: ErrNonFinite}
			}
		}
		if math.IsNaN(y[i]) || math.IsInf(y[i], 0) {
			return nil, &DataError{Row: i, Column: "response", Err: ErrNonFinite}
		}
		o.fold(row, y[i])
	}
	return o, nil
}

// Seed resets o to the rows of f (f.X(), f.Y()). The number of
// coefficients of f must equal o's; otherwise Seed panics.
func (o *Online) Seed(f *Fit) {
	if f.P != o.p {
		panic(fmt.Sprintf("engine: Online.Seed: fit has %d coefficients, online fit %d", f.P, o.p))
	}
	clear(o.r)
	o.n, o.diagOK, o.since = 0, false, 0
	X, y := f.X(), f.Y()
	if f.sw != nil {
		// A weighted fit: the rows √w_i [x_i y_i] (weights.go).
		row := make([]float64, o.p)
		for i := 0; i < f.N; i++ {
			s := f.sw[i]
			for j, v := range X.RawRowView(i) {
				row[j] = v * s
			}
			o.fold(row, y[i]*s)
		}
		return
	}
	for i := 0; i < f.N; i++ {
		o.fold(X.RawRowView(i), y[i])
	}
}

// AddWeighted adds a row of weight w (> 0 and finite) to an online fit of
// weighted rows (one seeded from a weighted Fit): it folds in √w [x y],
// so that the diagnostics are those of Diagnose on a weighted fit, and
// returns Obs.Residual on the scale of y. A weight that is not positive
// and finite is not added and gives false. Add(x, y) is AddWeighted(x, y, 1).
func (o *Online) AddWeighted(x []float64, y, w float64) (Obs, bool) {
	if !(w > 0) || math.IsInf(w, 0) {
		return Obs{}, false
	}
	if w == 1 {
		return o.Add(x, y)
	}
	s := math.Sqrt(w)
	xs := make([]float64, len(x))
	for j, v := range x {
		xs[j] = v * s
	}
	ob, ok := o.Add(xs, y*s)
	if ok {
		ob.Residual /= s
	}
	return ob, ok
}

// N returns the number of rows added.
func (o *Online) N() int { return o.n }

// P returns the number of coefficients.
func (o *Online) P() int { return o.p }

// RSS returns the residual sum of squares of the current fit.
func (o *Online) RSS() float64 {
	q := o.p + 1
	d := o.r[q*q-1]
	return d * d
}

// Coef writes the current coefficients into dst (allocated when nil or
// short) and returns it. Before the design has full rank the values are
// meaningless; use Full.
func (o *Online) Coef(dst []float64) []float64 {
	if len(dst) < o.p {
		dst = make([]float64, o.p)
	}
	dst = dst[:o.p]
	o.solveCoef(dst)
	return dst
}

// Full reports whether the rows so far determine all p coefficients.
func (o *Online) Full() bool {
	q := o.p + 1
	var scale float64
	for k := 0; k < o.p; k++ {
		scale = math.Max(scale, math.Abs(o.r[k*q+k]))
	}
	for k := 0; k < o.p; k++ {
		if !(math.Abs(o.r[k*q+k]) > 1e-13*scale) {
			return false
		}
	}
	return o.n >= o.p
}

// fold applies the Givens rotations that add the row [x y] to R̃.
func (o *Online) fold(x []float64, y float64) {
	p, q := o.p, o.p+1
	t := o.t
	copy(t, x)
	t[p] = y
	for k := 0; k < q; k++ {
		tk := t[k]
		if tk == 0 {
			continue
		}
		rk := o.r[k*q : (k+1)*q]
		rkk := rk[k]
		rho := math.Hypot(rkk, tk)
		c, s := rkk/rho, tk/rho
		rk[k] = rho
		t[k] = 0
		for j := k + 1; j < q; j++ {
			a, b := rk[j], t[j]
			rk[j] = c*a + s*b
			t[j] = c*b - s*a
		}
	}
	o.n++
}

// solveCoef solves R b = Q'y into b.
func (o *Online) solveCoef(b []float64) {
	p, q := o.p, o.p+1
	for k := p - 1; k >= 0; k-- {
		sum := o.r[k*q+p]
		for j := k + 1; j < p; j++ {
			sum -= o.r[k*q+j] * b[j]
		}
		b[k] = sum / o.r[k*q+k]
	}
}

// exactDiag computes diag((X'X)^-1) = row norms² of R^-1.
func (o *Online) exactDiag() {
	p, q := o.p, o.p+1
	ri := o.rinv // upper triangular R^-1, row-major
	for j := p - 1; j >= 0; j-- {
		ri[j*p+j] = 1 / o.r[j*q+j]
		for i := j - 1; i >= 0; i-- {
			var sum float64
			for k := i + 1; k <= j; k++ {
				sum += o.r[i*q+k] * ri[k*p+j]
			}
			ri[i*p+j] = -sum / o.r[i*q+i]
		}
	}
	for i := 0; i < p; i++ {
		var s float64
		for j := i; j < p; j++ {
			s += ri[i*p+j] * ri[i*p+j]
		}
		o.diag[i] = s
	}
	o.diagOK = true
	o.since = 0
}

// Add folds in the row (design row x of length P, response y) and returns
// its diagnostics against the fit that includes it, as Diagnose would give
// for the last row of all rows so far: leverage, residual, studentized
// residuals, Cook's distance, DFFITS, DFBETAS, COVRATIO and the outlier
// p-values (Bonferroni with n = N()); its DFBETAS are then given by
// o.DFBETAS. Values that are
// undefined (h = 1, taken as 1 - h < 2^-46 as in Diagnose) are NaN. The second result is false, and Obs is zero,
// while N() <= P()+1 or the rows so far do not determine the fit.
//
// A non-finite value is not added and gives false. A design row of the
// wrong length panics.
func (o *Online) Add(x []float64, y float64) (Obs, bool) {
	p, q := o.p, o.p+1
	if len(x) != p {
		panic(fmt.Sprintf("engine: Online.Add: row has %d values, want %d", len(x), p))
	}
	for _, v := range x {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return Obs{}, false
		}
	}
	if math.IsNaN(y) || math.IsInf(y, 0) {
		return Obs{}, false
	}
	o.fold(x, y)
	if o.n <= p+1 || !o.Full() {
		o.diagOK = false
		return Obs{}, false
	}
	// w = R^-T x (forward substitution on R').
	w := o.w
	for k := 0; k < p; k++ {
		sum := x[k]
		for j := 0; j < k; j++ {
			sum -= o.r[j*q+k] * w[j]
		}
		w[k] = sum / o.r[k*q+k]
	}
	h := fgDot(w, w)
	// v = R^-1 w = (X'X)^-1 x.
	v := o.v
	for k := p - 1; k >= 0; k-- {
		sum := w[k]
		for j := k + 1; j < p; j++ {
			sum -= o.r[k*q+j] * v[j]
		}
		v[k] = sum / o.r[k*q+k]
	}
	o.solveCoef(o.b)
	e := y - fgDot(x, o.b)

	o.since++
	if !o.diagOK || o.since >= p || !(h < 1) {
		o.exactDiag()
	} else {
		for j := 0; j < p; j++ {
			o.diag[j] -= v[j] * v[j] / (1 - h)
		}
	}

	n := float64(o.n)
	df := n - float64(p)
	rss := o.RSS()
	s2 := rss / df
	if h > 1 {
		h = 1
	}
	ob := Obs{Leverage: h, Residual: e}
	// Like Diagnose: with 1 - h below 2^-46 the row is, to working
	// precision, fitted exactly and its deletion measures are undefined.
	if 1-h < 0x1p-46 {
		nan := math.NaN()
		ob.StudentInternal, ob.StudentExternal, ob.Cook, ob.DFFITS = nan, nan, nan, nan
		ob.COVRATIO, ob.OutlierP, ob.BonferroniP = nan, nan, nan
		for j := range o.dfb {
			o.dfb[j] = nan
		}
		return ob, true
	}
	omh := 1 - h
	s2i := (rss - e*e/omh) / (df - 1)
	if s2i < 0 {
		s2i = 0
	}
	ob.StudentInternal = e / math.Sqrt(s2*omh)
	ob.StudentExternal = e / math.Sqrt(s2i*omh)
	ob.Cook = ob.StudentInternal * ob.StudentInternal * h / (float64(p) * omh)
	ob.DFFITS = ob.StudentExternal * math.Sqrt(h/omh)
	si := math.Sqrt(s2i)
	for j := 0; j < p; j++ {
		o.dfb[j] = v[j] * e / (omh * si * math.Sqrt(o.diag[j]))
	}
	ob.COVRATIO = math.Pow(s2i/s2, float64(p)) / omh
	ob.OutlierP = TTail2(ob.StudentExternal, df-1)
	ob.BonferroniP = math.Min(1, n*ob.OutlierP)
	return ob, true
}

// DFBETAS returns the DFBETAS of the row of the last Add that returned
// true, one per coefficient. The slice is owned by o and overwritten by
// the next Add; copy it to keep it.
func (o *Online) DFBETAS() []float64 { return o.dfb }
