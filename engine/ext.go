package engine

import "math"

// The extended-precision route of Refit and Diagnose, and the exact
// values of derived design columns. See the package documentation
// ("Accuracy") for the promise and the measured figures.

// derivedTerm describes a design column that is a product of powers of
// other design columns of the same model: Π_k x_{col[k]}^{pow[k]}, for
// example x^3 from the column of the term x, or x^9*x (x^10), or x*z.
type derivedTerm struct{ col, pow []int }

// derivations returns, per design column, how its exact value follows
// from other columns (nil for a plain column). A term is derived when each
// of its factors is an atom (a column, or the log of a column) that the
// model also has as a term of its own, to the first power: then that
// term's column holds the atom's value exactly, and the product of its
// powers can be formed in double-double instead of rounded to double.
//
// A term with a group factor is neither an atom nor derived: its columns
// are indicators (or a factor's values where the row is at a level, 0
// elsewhere), taken as given. Such a term may span several design
// columns (Model.termWidth), so a term's first column is found by adding
// up the widths of the terms before it.
func derivations(m Model) []*derivedTerm {
	col := make([]int, len(m.Terms)) // first design column of each term
	c := 0
	if m.Intercept {
		c = 1
	}
	for k := range m.Terms {
		col[k] = c
		c += m.termWidth(k)
	}
	type atom struct {
		col string
		log bool
	}
	plain := func(t Term) bool {
		return len(t.Factors) == 1 && t.Factors[0].Power == 1 && !t.Factors[0].Group
	}
	base := make(map[atom]int)
	for k, t := range m.Terms {
		if plain(t) {
			base[atom{t.Factors[0].Column, t.Factors[0].Log}] = col[k]
		}
	}
	out := make([]*derivedTerm, m.P())
	for k, t := range m.Terms {
		if plain(t) || t.HasGroup() {
			continue
		}
		d := &derivedTerm{}
		for _, f := range t.Factors {
			c, ok := base[atom{f.Column, f.Log}]
			if !ok {
				d = nil
				break
			}
			merged := false
			for i := range d.col {
				if d.col[i] == c {
					d.pow[i] += f.Power
					merged = true
				}
			}
			if !merged {
				d.col = append(d.col, c)
				d.pow = append(d.pow, f.Power)
			}
		}
		if d != nil {
			out[col[k]] = d
		}
	}
	return out
}

// value returns the column's value for the design row x, in
// double-double (relative error about 2·(Σ pow)·2^-104).
func (d *derivedTerm) value(x []float64) dd {
	v := dd{1, 0}
	for k, c := range d.col {
		for i := 0; i < d.pow[k]; i++ {
			v = v.mulF(x[c])
		}
	}
	return v
}

// derivedTol bounds |exact - X_ij| relative to |X_ij| for a design value
// to count as the rounded product of its factors: a few roundings (the
// powers are rounded once each, then their product).
const derivedTol = 16 * 0x1p-52

// low returns v - x rounded to double and whether x is v within
// derivedTol.
func low(v dd, x float64) (float64, bool) {
	d := (v.hi - x) + v.lo
	return d, math.Abs(d) <= derivedTol*math.Abs(x)
}

// designLo returns, per design column, the low parts lo_i = x_i - X_i of a
// derived column, x_i its exact value (to double-double accuracy): the
// design the fit works with is X + lo. A column gets nil when it is plain,
// when it is exact in double already, or when some row's value is not the
// rounded product of its factors (a design not built by Model.Design):
// then the column is taken as given.
func designLo(der []*derivedTerm, xd []float64, stride, n, p int) [][]float64 {
	var out [][]float64
	for j, d := range der {
		if d == nil {
			continue
		}
		lo := make([]float64, n)
		nonzero, ok := false, true
		for i := 0; i < n && ok; i++ {
			row := xd[i*stride : i*stride+p]
			lo[i], ok = low(d.value(row), row[j])
			nonzero = nonzero || lo[i] != 0
		}
		if ok && nonzero {
			if out == nil {
				out = make([][]float64, p)
			}
			out[j] = lo
		}
	}
	return out
}

// rowLo sets lo to the low parts of the derived entries of one design row
// x (0 for the rest) and reports whether any is nonzero.
func rowLo(der []*derivedTerm, x, lo []float64) bool {
	any := false
	for j, d := range der {
		lo[j] = 0
		if d == nil {
			continue
		}
		if l, ok := low(d.value(x), x[j]); ok {
			lo[j] = l
			any = any || l != 0
		}
	}
	return any
}

// extFactors holds the factors of a fit on the extended-precision route,
// in double-double: R with R'R = W'W for the scaled design W = X T^-1
// (X including the low parts of derived columns), R^-1 with row j divided
// by scale_j, and M = T^-1 R^-1, so that (X'X)^-1 = M M'.
type extFactors struct {
	p    int
	r    []dd // p x p upper triangular, row-major
	ri   []dd // R^-1
	ris  []dd // R^-1, row j divided by scale_j
	m    []dd // M
	invS []dd // 1/scale_j
	cond float64
}

// factorExt computes R in double-double from the binary64 factor R0 of
// the first pass, by one pass over the rows: with the rows w_i of W in
// double-double, y_i = R0^-T w_i and G = Σ y_i y_i' (Y = W R0^-1 has
// nearly orthonormal columns, so G is close to I), then G = R_G'R_G by
// Cholesky and R = R_G R0. Every step is backward stable in
// double-double: R is the exact factor of a design within about p·2^-104
// of W, so R^-1, (X'X)^-1 and the hat values are accurate to about
// κ·p·2^-104 relative; the binary64 R0 is only a preconditioner. It
// returns nil when G is not numerically positive definite.
func (w *work) factorExt() *extFactors {
	p, ch, sc := w.p, w.ch, &w.sc
	R0 := w.R
	e := &extFactors{p: p, invS: make([]dd, p)}
	for j := range e.invS {
		e.invS[j] = recip(sc.scale[j])
	}
	invD := make([]dd, p)
	for l := range invD {
		invD[l] = recip(R0[l*p+l])
	}
	pp := p * p
	// Per chunk, G as unevaluated sums s + c (the products' exact high
	// parts summed error-free into s, everything else into c, as the
	// compensated dot product does: as accurate as double-double
	// accumulation, fewer operations).
	parts := make([]float64, 2*ch.nc*pp)
	ch.run(func(c int) {
		lo, hi := ch.bounds(c)
		u := make([]dd, p)
		yv := make([]dd, p)
		gs := parts[2*c*pp : (2*c+1)*pp]
		gc := parts[(2*c+1)*pp : (2*c+2)*pp]
		for i := lo; i < hi; i++ {
			w.centred(u, i)
			for l := 0; l < p; l++ {
				s := u[l].mulDD(e.invS[l])
				for j := 0; j < l; j++ {
					s = s.addDD(yv[j].mulF(-R0[j*p+l]))
				}
				yv[l] = s.mulDD(invD[l])
			}
			if w.wt != nil {
				// Weighted: the row √w_i x_i, √w_i in double-double.
				sq := dd{w.wt[i], 0}.sqrt()
				for l := range yv {
					yv[l] = yv[l].mulDD(sq)
				}
			}
			for a := 0; a < p; a++ {
				ya := yv[a]
				sa, ca := gs[a*p:(a+1)*p], gc[a*p:(a+1)*p]
				for b := a; b < p; b++ {
					yb := yv[b]
					ph := ya.hi * yb.hi
					pe := math.FMA(ya.hi, yb.hi, -ph) + (ya.hi*yb.lo + ya.lo*yb.hi)
					var t float64
					sa[b], t = twoSum(sa[b], ph)
					ca[b] += t + pe
				}
			}
		}
	})
	G := make([]dd, pp)
	for c := 0; c < ch.nc; c++ {
		for k := range G {
			G[k] = G[k].add(parts[2*c*pp+k]).add(parts[(2*c+1)*pp+k])
		}
	}
	// Cholesky: G = RG'RG, RG upper.
	RG := make([]dd, pp)
	for j := 0; j < p; j++ {
		d := G[j*p+j]
		for k := 0; k < j; k++ {
			d = d.sub(RG[k*p+j].mulDD(RG[k*p+j]))
		}
		if !(d.hi > 0) {
			return nil
		}
		RG[j*p+j] = d.sqrt()
		for l := j + 1; l < p; l++ {
			s := G[j*p+l]
			for k := 0; k < j; k++ {
				s = s.sub(RG[k*p+j].mulDD(RG[k*p+l]))
			}
			RG[j*p+l] = s.divDD(RG[j*p+j])
		}
	}
	// R = RG R0.
	e.r = make([]dd, pp)
	for j := 0; j < p; j++ {
		for l := j; l < p; l++ {
			var s dd
			for k := j; k <= l; k++ {
				s = s.addDD(RG[j*p+k].mulF(R0[k*p+l]))
			}
			e.r[j*p+l] = s
		}
	}
	e.ri = invertUpperDD(e.r, p)
	e.ris = make([]dd, pp)
	e.m = make([]dd, pp)
	for j := 0; j < p; j++ {
		for l := j; l < p; l++ {
			v := e.ri[j*p+l].mulDD(e.invS[j])
			e.ris[j*p+l] = v
			e.m[j*p+l] = v
		}
	}
	if sc.intercept {
		for j := 1; j < p; j++ {
			for l := j; l < p; l++ {
				e.m[l] = e.m[l].addDD(e.m[j*p+l].mulF(-sc.mean[j]))
			}
		}
	}
	e.cond = conditionUpper(roundDD(e.r), p)
	return e
}

// centred sets u to row i of X (with the low parts of derived columns) in
// double-double, centred on the scaling's means: u = T^-T x_i before the
// division by the scales.
func (w *work) centred(u []dd, i int) {
	row := w.xd[i*w.stride : i*w.stride+w.p]
	centreRow(u, row, w.lo, i, &w.sc)
}

// centreRow sets u = x - mean·x_0 (the intercept column is x_0 = 1) in
// double-double, x the design row with the low parts lo[j][i] of derived
// columns (lo may be nil).
func centreRow(u []dd, row []float64, lo [][]float64, i int, sc *scaling) {
	for j, v := range row {
		var s, e float64
		if sc.intercept && j > 0 {
			s, e = twoSum(v, -sc.mean[j])
		} else {
			s = v
		}
		if lo != nil && lo[j] != nil {
			e += lo[j][i]
		}
		s, e = twoSumQuick(s, e)
		u[j] = dd{s, e}
	}
}

// refineExt returns the coefficients in double-double, refined on the
// corrected seminormal equations R'R dc = W'(y - Xb) with the
// double-double R of factorExt, from the binary64 QR solution b0 (c0 in
// the scaled design): the residuals y - Xb and X'r in double-double
// against X plus the low parts of derived columns, the solves in
// double-double. With R accurate, a step contracts the error by about
// κ²·2^-104, so two or three steps reach the limit, about
// κ²·2^-104·|r|/|Wc| + κ·2^-104 relative. fscr is scratch of length n.
func (w *work) refineExt(e *extFactors, b0, c0, fscr []float64) (bh, bl []float64) {
	n, p := w.n, w.p
	ch, sc := w.ch, &w.sc
	xd, stride, y := w.xd, w.stride, w.y
	b := make([]dd, p)
	c := make([]dd, p)
	for j := range b {
		b[j] = dd{b0[j], 0}
		c[j] = dd{c0[j], 0}
	}
	bh = make([]float64, p)
	bl = make([]float64, p)
	split := func() {
		for j := range b {
			bh[j], bl[j] = b[j].hi, b[j].lo
		}
	}
	if w.r == nil {
		w.r = make([]float64, n)
	}
	r, f := w.r, fscr
	gpart := make([]float64, 3*ch.nc*p)
	g := make([]dd, p)
	dc := make([]dd, p)
	db := make([]dd, p)
	prev := math.Inf(1)
	rho := 16 * float64(p) * e.cond * e.cond * 0x1p-104
	for it := 0; it < maxRefineExt; it++ {
		split()
		ch.run(func(c int) {
			lo, hi := ch.bounds(c)
			for i := lo; i < hi; i++ {
				row := xd[i*stride : i*stride+p]
				s1, c1 := residualExt(y[i], row, w.lo, i, bh, bl)
				ri := s1 + c1
				fi := (s1 - ri) + c1
				if w.wt != nil {
					// Weighted: r + f = w (y - x'b), for X'W(y - Xb).
					wi := w.wt[i]
					pr := wi * ri
					fi = math.FMA(wi, ri, -pr) + wi*fi
					ri = pr
				}
				r[i] = ri
				f[i] = fi
			}
			gs := gpart[3*c*p : (3*c+1)*p]
			gc := gpart[(3*c+1)*p : (3*c+2)*p]
			gf := gpart[(3*c+2)*p : (3*c+3)*p]
			xtr(xd[lo*stride:], stride, p, r[lo:hi], f[lo:hi], gs, gc, gf)
			for j, l := range w.lo {
				if l != nil {
					gf[j] += dot(l[lo:hi], r[lo:hi])
				}
			}
		})
		for j := range g {
			g[j] = dd{}
		}
		for c := 0; c < ch.nc; c++ {
			for j := 0; j < p; j++ {
				g[j] = g[j].add(gpart[3*c*p+j]).add(gpart[(3*c+1)*p+j]).add(gpart[(3*c+2)*p+j])
			}
		}
		// gW = T^-T g, dc = R^-1 R^-T gW, db = T^-1 dc.
		for j := 0; j < p; j++ {
			v := g[j]
			if sc.intercept && j > 0 {
				v = v.addDD(g[0].mulF(-sc.mean[j]))
			}
			dc[j] = v.mulDD(e.invS[j])
		}
		solveUpperTDD(e.r, p, dc)
		solveUpperDD(e.r, p, dc)
		fromWDD(sc, e.invS, db, dc)
		cmax := 0.0
		for j := 0; j < p; j++ {
			b[j] = b[j].addDD(db[j])
			c[j] = c[j].addDD(dc[j])
			cmax = math.Max(cmax, math.Abs(c[j].hi))
		}
		nd := 0.0
		for j := 0; j < p; j++ {
			den := math.Max(math.Abs(c[j].hi), 1e-16*cmax)
			nd = math.Max(nd, math.Abs(dc[j].hi)/den)
		}
		// Stop at double-double rounding level, when the corrections no
		// longer shrink (the limit above is reached), or when the next
		// one, predicted by the contraction (the observed ratio, at least
		// the a-priori 16p·κ²·2^-104), is below rounding level.
		if nd <= 0x1p-100 || math.IsNaN(nd) || nd > prev/2 {
			break
		}
		if it > 0 && nd*math.Max(nd/prev, rho) <= 0x1p-100 {
			break
		}
		prev = nd
	}
	split()
	return bh, bl
}

// maxRefineExt bounds the steps of refineExt.
const maxRefineExt = 8

// residualExt returns y - x·b as an unevaluated sum s + c, with x the
// design row (plus the low parts lo[j][i] of derived columns, lo may be
// nil) and b = bh + bl in double-double: x·bh by the compensated dot
// product, the small terms x·bl and lo·bh in double.
func residualExt(y float64, row []float64, lo [][]float64, i int, bh, bl []float64) (s, c float64) {
	s, c = residualDD(y, 0, row, bh)
	t := 0.0
	for j, v := range row {
		t += v * bl[j]
	}
	for j, l := range lo {
		if l != nil {
			t += l[i] * bh[j]
		}
	}
	return s, c - t
}

// fromWDD sets b = T^-1 c in double-double (b and c may not alias).
func fromWDD(sc *scaling, invS, b, c []dd) {
	for j := range c {
		b[j] = c[j].mulDD(invS[j])
	}
	if sc.intercept {
		for j := 1; j < len(c); j++ {
			b[0] = b[0].addDD(b[j].mulF(-sc.mean[j]))
		}
	}
}

// solveUpperDD overwrites x with R^-1 x in double-double.
func solveUpperDD(R []dd, p int, x []dd) {
	for i := p - 1; i >= 0; i-- {
		s := x[i]
		for j := i + 1; j < p; j++ {
			s = s.sub(R[i*p+j].mulDD(x[j]))
		}
		x[i] = s.divDD(R[i*p+i])
	}
}

// solveUpperTDD overwrites x with R^-T x in double-double.
func solveUpperTDD(R []dd, p int, x []dd) {
	for i := 0; i < p; i++ {
		s := x[i]
		for j := 0; j < i; j++ {
			s = s.sub(R[j*p+i].mulDD(x[j]))
		}
		x[i] = s.divDD(R[i*p+i])
	}
}

// invertUpperDD returns R^-1 in double-double (upper triangular,
// row-major).
func invertUpperDD(R []dd, p int) []dd {
	inv := make([]dd, p*p)
	for j := 0; j < p; j++ {
		inv[j*p+j] = dd{1, 0}.divDD(R[j*p+j])
		for i := j - 1; i >= 0; i-- {
			var s dd
			for k := i + 1; k <= j; k++ {
				s = s.addDD(R[i*p+k].mulDD(inv[k*p+j]))
			}
			inv[i*p+j] = s.neg().divDD(R[i*p+i])
		}
	}
	return inv
}

// roundDD returns the doubles nearest to v.
func roundDD(v []dd) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = x.float()
	}
	return out
}

// qRow sets q = R^-T T^-T x (x the design row with low parts lo, which
// may be all zero) in double-double, and returns h = wt·|q|² and 1 - h,
// rounded once each (wt is a row weight, 1 unweighted). u is scratch of
// length p.
func (e *extFactors) qRow(q, u []dd, x, lo []float64, sc *scaling, wt float64) (h, om float64) {
	p := e.p
	for j, v := range x {
		var s, c float64
		if sc.intercept && j > 0 {
			s, c = twoSum(v, -sc.mean[j]*x[0])
			c += math.FMA(-sc.mean[j], x[0], sc.mean[j]*x[0])
		} else {
			s = v
		}
		if lo != nil {
			c += lo[j]
		}
		s, c = twoSumQuick(s, c)
		u[j] = dd{s, c}
	}
	var hh dd
	for l := 0; l < p; l++ {
		var s dd
		for j := 0; j <= l; j++ {
			s = s.addDD(e.ris[j*p+l].mulDD(u[j]))
		}
		q[l] = s
		hh = hh.addDD(s.mulDD(s))
	}
	if wt != 1 {
		hh = hh.mulF(wt)
	}
	return hh.float(), dd{1, 0}.sub(hh).float()
}

// vRow sets v = M q = (X'X)^-1 x rounded to double, q from qRow.
func (e *extFactors) vRow(v []float64, q []dd) {
	p := e.p
	for j := 0; j < p; j++ {
		var s dd
		for l := j; l < p; l++ {
			s = s.addDD(e.m[j*p+l].mulDD(q[l]))
		}
		v[j] = s.float()
	}
}

// unscaled returns C_ij = Σ_l M_il M_jl in double-double.
func (e *extFactors) unscaled(i, j int) dd {
	p := e.p
	var s dd
	for l := max(i, j); l < p; l++ {
		s = s.addDD(e.m[i*p+l].mulDD(e.m[j*p+l]))
	}
	return s
}
