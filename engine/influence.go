package engine

import (
	"math"
	"sort"
	"sync"
)

// Obs holds the diagnostics of one observation (formulas in the package
// documentation). Values that are undefined, for example every deletion
// measure of a row with leverage 1, are NaN. Its DFBETAS are kept apart,
// in Influence.DFBETAS, so that a table of a million rows holds no
// pointers for the garbage collector to trace.
type Obs struct {
	Leverage        float64 // h_ii = x_i'(X'X)^-1 x_i
	Residual        float64 // e_i = y_i - x_i'b
	StudentInternal float64 // r_i = e_i/(s√(1-h))
	StudentExternal float64 // t_i = e_i/(s_(i)√(1-h))
	Cook            float64 // D_i = r_i² h/(p(1-h))
	DFFITS          float64 // t_i √(h/(1-h))
	COVRATIO        float64 // (s_(i)²/s²)^p/(1-h)
	OutlierP        float64 // two-sided p of t_i on n-p-1 df (unadjusted)
	BonferroniP     float64 // min(1, n·OutlierP)
}

// Influence is the per-observation table of a fit, Rows in row order.
// DFBETAS holds every row's DFBETAS, one coefficient after another in
// Fit.Coef order, row after row: row i's are DFBETAS[i*P : (i+1)*P]
// (DFBETASRow).
type Influence struct {
	Fit     *Fit
	Rows    []Obs
	DFBETAS []float64
}

// DFBETASRow returns row i's DFBETAS, one per coefficient in Fit.Coef
// order (a view into inf.DFBETAS).
func (inf *Influence) DFBETASRow(i int) []float64 {
	p := inf.Fit.P
	return inf.DFBETAS[i*p : (i+1)*p : (i+1)*p]
}

// deletedRecompute: rows whose deleted residual sum of squares is below
// this fraction of RSS (a dominating outlier) get it recomputed without
// cancellation; at most maxRecompute of them.
const (
	deletedRecompute = 1e-2
	maxRecompute     = 16
)

// Diagnose computes every observation's diagnostics in closed form from
// the fit's QR factors, in O(n p²) time: no leave-one-out refits. For each
// row, q = R^-T w_i (w_i the scaled row) gives h = |q|², and
// (X'X)^-1 x_i = T^-1 R^-1 q gives the DFBETAS. The deleted residual sum
// of squares (n-p-1)s_(i)² = RSS - e_i²/(1-h_i); where that cancels badly
// (it is below 1% of RSS: a row that dominates the fit) it is recomputed
// in double-double as Σ_{k≠i}(e_k + h_ki e_i/(1-h_i))², the residuals of
// the fit without row i, which loses nothing.
func Diagnose(f *Fit) *Influence {
	inf, _ := diagnose(f, nil)
	return inf
}

// Assess computes the table of f and judges every row: the same result as
// Judge(Diagnose(f), c), in one pass over the rows, each chunk judged
// while its measures are still in cache. This is the route for a whole
// table; Diagnose and Judge remain for a table judged under several sets
// of cutoffs.
func Assess(f *Fit, c Cutoffs) (*Influence, []Verdict) {
	return diagnose(f, &c)
}

// diagnose computes the table and, when c is not nil, the verdicts.
func diagnose(f *Fit, c *Cutoffs) (*Influence, []Verdict) {
	n, p := f.N, f.P
	d := newDiag(f)
	ch := newChunking(n, p)
	var (
		obs []Obs
		dfb []float64
		out []Verdict
	)
	// The outputs are zeroed as they are allocated, on the allocating
	// goroutine: on two for a large table (about 150 MB at a million rows).
	ch.alloc(
		func() { obs = make([]Obs, n) },
		func() {
			dfb = make([]float64, n*p)
			if c != nil {
				out = make([]Verdict, n)
			}
		})
	inf := &Influence{Fit: f, Rows: obs, DFBETAS: dfb}
	var j *judge
	if c != nil {
		j = newJudge(f, *c, nil)
	}
	type cand struct {
		row int
		d   float64
	}
	cands := make([][]cand, ch.nc)
	ch.run(func(c int) {
		lo, hi := ch.bounds(c)
		d := d.clone()
		bk := blocks.Get().(*block)
		defer blocks.Put(bk)
		bk.init(p)
		v := make([]float64, p)
		var cf chunkFlags
		if j != nil {
			cf = j.begin(lo, hi)
		}
		for b0 := lo; b0 < hi; b0 += blockRows {
			nb := min(blockRows, hi-b0)
			switch {
			case f.ext == nil && f.sw == nil:
				d.block(bk, b0, nb)
				for r := 0; r < nb; r++ {
					i := b0 + r
					h := bk.h[r]
					for j := range v {
						v[j] = bk.v[j][r]
					}
					om := 1 - h
					del, ok := d.deleted(f.Residuals[i], om)
					d.fill(&inf.Rows[i], dfb[i*p:(i+1)*p], f.Residuals[i], h, om, v, del)
					if ok && del < deletedRecompute*f.RSS && len(cands[c]) < maxRecompute {
						cands[c] = append(cands[c], cand{i, del})
					}
				}
			case f.ext == nil:
				// Weighted (weights.go): the measures of the scaled
				// rows √w_i x_i, residuals reported on the scale of y.
				d.block(bk, b0, nb)
				for r := 0; r < nb; r++ {
					i := b0 + r
					h := bk.h[r]
					for j := range v {
						v[j] = bk.v[j][r]
					}
					h, e := d.weigh(i, h, v, f.Residuals[i])
					om := 1 - h
					del, ok := d.deleted(e, om)
					d.fill(&inf.Rows[i], dfb[i*p:(i+1)*p], e, h, om, v, del)
					inf.Rows[i].Residual = f.Residuals[i]
					if ok && del < deletedRecompute*f.RSS && len(cands[c]) < maxRecompute {
						cands[c] = append(cands[c], cand{i, del})
					}
				}
			default:
				for i := b0; i < b0+nb; i++ {
					h, om := d.rowExt(v, i)
					e := d.eRow(i)
					del, ok := d.deleted(e, om)
					d.fill(&inf.Rows[i], dfb[i*p:(i+1)*p], e, h, om, v, del)
					inf.Rows[i].Residual = f.Residuals[i]
					if ok && del < deletedRecompute*f.RSS && len(cands[c]) < maxRecompute {
						cands[c] = append(cands[c], cand{i, del})
					}
				}
			}
			if j != nil {
				// Judged while the block's measures are in cache.
				cf.rows(inf, out, b0, b0+nb)
			}
		}
		if j != nil {
			cf.end(out)
		}
	})
	var all []cand
	for _, cs := range cands {
		all = append(all, cs...)
	}
	if len(all) == 0 {
		return inf, out
	}
	sort.Slice(all, func(a, b int) bool { return all[a].d < all[b].d })
	if len(all) > maxRecompute {
		all = all[:maxRecompute]
	}
	rows := make([]int, len(all))
	for k, c := range all {
		rows[k] = c.row
	}
	dels := d.deletedExact(rows)
	w := make([]float64, p)
	v := make([]float64, p)
	for k, i := range rows {
		var h, om float64
		e := f.Residuals[i]
		if f.ext == nil {
			h = d.row(w, v, i)
			if f.sw != nil {
				h, e = d.weigh(i, h, v, e)
			}
			om = 1 - h
		} else {
			h, om = d.rowExt(v, i)
			e = d.eRow(i)
		}
		d.fill(&inf.Rows[i], inf.DFBETASRow(i), e, h, om, v, dels[k])
		inf.Rows[i].Residual = f.Residuals[i]
		if j != nil {
			j.one(inf, out, i)
		}
	}
	return inf, out
}

// diag holds what every row's diagnostics share.
type diag struct {
	f      *Fit
	p      int
	xd     []float64
	stride int
	kj     []float64 // 1/sqrt(C_jj)
	riS    []float64 // R^-1 with row j divided by scale_j
	xs     []float64 // scratch (one diag per goroutine)
	qd, ud []dd      // scratch of the extended route
	lo, vs []float64 // scratch: a row's low parts of derived columns, v
	tail   tTail
	table  *tailTable // nil for small fits
	s2, s  float64
	df1    float64
	nf, fp float64
	// reciprocals of s, s², n-p-1 and p
	is, is2, idf1, ifp float64
}

func newDiag(f *Fit) *diag {
	p := f.P
	raw := f.x.RawMatrix()
	d := &diag{f: f, p: p, xd: raw.Data, stride: raw.Stride, kj: make([]float64, p),
		s2: f.RSS / float64(f.N-p), df1: float64(f.N - p - 1), nf: float64(f.N), fp: float64(p)}
	d.s = math.Sqrt(d.s2)
	d.is, d.is2, d.idf1, d.ifp = 1/d.s, 1/d.s2, 1/d.df1, 1/d.fp
	d.riS = make([]float64, p*p)
	for j := 0; j < p; j++ {
		inv := 1 / f.sc.scale[j]
		for l := j; l < p; l++ {
			d.riS[j*p+l] = f.ri[j*p+l] * inv
		}
	}
	d.xs = make([]float64, p)
	d.tail = newTTail(d.df1)
	if f.N >= tailTableRows && d.df1 >= largeDF {
		d.table = newTailTable(d.tail)
	}
	for j := 0; j < p; j++ {
		c := 0.0
		if f.ext != nil {
			c = f.ext.unscaled(j, j).float()
		} else {
			for l := 0; l < p; l++ {
				c += f.m[j*p+l] * f.m[j*p+l]
			}
		}
		d.kj[j] = 1 / math.Sqrt(c)
	}
	d.scratch()
	return d
}

// scratch allocates the scratch space of the extended route.
func (d *diag) scratch() {
	if d.f.ext != nil {
		d.qd, d.ud = make([]dd, d.p), make([]dd, d.p)
		d.lo, d.vs = make([]float64, d.p), make([]float64, d.p)
	}
}

// rowExt is row on the extended route: h_i, 1 - h_i and v = (X'X)^-1 x_i,
// computed in double-double from the design row and the low parts of its
// derived columns, each rounded once. For a weighted fit they are those
// of the scaled row √w_i x_i, as weigh gives them on the binary64 route:
// h = w_i x_i'(X'WX)^-1 x_i with 1 - h in double-double,
// v = √w_i (X'WX)^-1 x_i.
func (d *diag) rowExt(v []float64, i int) (h, om float64) {
	f := d.f
	row := d.xd[i*d.stride : i*d.stride+d.p]
	var lo []float64
	if f.lo != nil {
		lo = d.lo
		for j, l := range f.lo {
			lo[j] = 0
			if l != nil {
				lo[j] = l[i]
			}
		}
	}
	wt := 1.0
	if f.sw != nil {
		wt = f.Weights[i]
	}
	h, om = f.ext.qRow(d.qd, d.ud, row, lo, &f.sc, wt)
	f.ext.vRow(v, d.qd)
	if f.sw != nil {
		s := f.sw[i]
		for j := range v {
			v[j] *= s
		}
	}
	if h > 1 {
		h, om = 1, 0
	}
	return h, om
}

// row returns h_i and sets v = (X'X)^-1 x_i; w is scratch. With
// w = T^-T x_i (the scaled, centred row), q = R^-T w gives h = |q|², and
// v = M q with M = T^-1 R^-1 precomputed. M is upper triangular (T^-1
// and R^-1 both are), so v_j needs only q_l for l >= j.
func (d *diag) row(w, v []float64, i int) float64 {
	p := d.p
	d.q(w, i)
	h := 0.0
	for _, q := range w {
		h += q * q
	}
	m := d.f.m
	for j := 0; j < p; j++ {
		mj := m[j*p+j : (j+1)*p]
		wj := w[j:p]
		wj = wj[:len(mj)]
		s := 0.0
		for l, q := range wj {
			s += mj[l] * q
		}
		v[j] = s
	}
	if h > 1 && d.f.sw == nil { // weighted: clamped by weigh
		h = 1
	}
	return h
}

// q sets w = R^-T T^-T x_i, using R^-1 with its rows divided by the
// column scales (riS, precomputed): R^-T is lower triangular, so
// q_l = Σ_{j<=l} riS_jl (x_ij - mean_j), x_ij including the low part of
// a derived column.
func (d *diag) q(w []float64, i int) {
	p := d.p
	row := d.xd[i*d.stride : i*d.stride+p]
	sc := &d.f.sc
	x := d.xs[:p]
	if sc.intercept {
		x[0] = row[0]
		for j := 1; j < p; j++ {
			x[j] = row[j] - sc.mean[j]*row[0]
		}
	} else {
		copy(x, row)
	}
	for j, l := range d.f.lo {
		if l != nil {
			x[j] += l[i]
		}
	}
	ri := d.riS
	for l := 0; l < p; l++ {
		s := 0.0
		for j := 0; j <= l; j++ {
			s += ri[j*p+l] * x[j]
		}
		w[l] = s
	}
}

// deleted returns RSS - e²/(1-h), om = 1-h (ok false when it is
// undefined). Its relative rounding error is about eps·RSS/result, at most
// 100 eps for results above deletedRecompute·RSS; smaller results are
// recomputed by deletedExact.
func (d *diag) deleted(e, om float64) (float64, bool) {
	if om < 0x1p-46 || d.df1 <= 0 {
		return math.NaN(), false
	}
	del := d.f.RSS - e*e/om
	if del < 0 {
		del = 0
	}
	return del, true
}

// deletedExact returns Σ_{k≠i}(e_k + h_ki e_i/(1-h_i))² for each listed
// row i, in one pass over the data.
func (d *diag) deletedExact(rows []int) []float64 {
	p, n := d.p, d.f.N
	qi := make([][]float64, len(rows))
	coef := make([]float64, len(rows))
	for k, i := range rows {
		qi[k] = make([]float64, p)
		om := d.qAny(qi[k], i)
		coef[k] = d.eRow(i) / om
	}
	acc := make([]dd, len(rows))
	w := make([]float64, p)
	for r := 0; r < n; r++ {
		d.qAny(w, r)
		e := d.eRow(r)
		for k, i := range rows {
			if r == i {
				continue
			}
			hki := 0.0
			for j, v := range w {
				hki += v * qi[k][j]
			}
			v := dd{}.addProd(hki, coef[k]).add(e).float()
			acc[k] = acc[k].addProd(v, v)
		}
	}
	out := make([]float64, len(rows))
	for k := range acc {
		out[k] = acc[k].float()
	}
	return out
}

// qAny sets w = R^-T T^-T x_i (in double-double on the extended route,
// then rounded) and returns 1 - |w|²; for a weighted fit, those of the
// scaled row √w_i x_i.
func (d *diag) qAny(w []float64, i int) float64 {
	sw := d.f.sw
	if d.f.ext == nil {
		d.q(w, i)
		if sw != nil {
			for j := range w {
				w[j] *= sw[i]
			}
		}
		h := 0.0
		for _, v := range w {
			h += v * v
		}
		return 1 - h
	}
	_, om := d.rowExt(d.vs, i)
	for l, q := range d.qd {
		if sw != nil {
			q = q.mulF(sw[i])
		}
		w[l] = q.float()
	}
	return om
}

// eRow returns row i's residual as the measures take it: e_i, or
// √w_i e_i for a weighted fit (the residual of the scaled row).
func (d *diag) eRow(i int) float64 {
	e := d.f.Residuals[i]
	if sw := d.f.sw; sw != nil {
		e *= sw[i]
	}
	return e
}

// fill computes the row's measures, its DFBETAS into dfb, from e, h,
// om = 1 - h, v = (X'X)^-1 x_i and the deleted residual sum of squares
// del. It divides twice (by 1-h and by s_(i)); the rest multiplies by
// reciprocals computed once per fit, which moves each value by a few ulps
// at most.
func (d *diag) fill(o *Obs, dfb []float64, e, h, om float64, v []float64, del float64) {
	o.Residual = e
	o.Leverage = h
	nan := math.NaN()
	if om < 0x1p-46 {
		o.StudentInternal, o.Cook = nan, nan
		o.StudentExternal, o.DFFITS, o.COVRATIO = nan, nan, nan
		o.OutlierP, o.BonferroniP = nan, nan
		for j := range dfb {
			dfb[j] = nan
		}
		return
	}
	iom := 1 / om
	sq := math.Sqrt(om)
	isq := sq * iom // 1/√(1-h)
	ri := e * d.is * isq
	o.StudentInternal = ri
	o.Cook = ri * ri * h * iom * d.ifp
	if math.IsNaN(del) {
		o.StudentExternal, o.DFFITS, o.COVRATIO = nan, nan, nan
		o.OutlierP, o.BonferroniP = nan, nan
		for j := range dfb {
			dfb[j] = nan
		}
		return
	}
	s2i := del * d.idf1
	si := math.Sqrt(s2i)
	isi := 1 / si
	ti := e * isi * isq
	o.StudentExternal = ti
	o.DFFITS = ti * math.Sqrt(h*iom)
	scale := e * iom * isi
	for j := range dfb {
		dfb[j] = v[j] * scale * d.kj[j]
	}
	o.COVRATIO = powInt(s2i*d.is2, d.p) * iom
	var pv float64
	if d.table != nil {
		pv = d.table.p2(ti)
	} else {
		pv = d.tail.p2(ti)
	}
	o.OutlierP = pv
	// min(1, n·p) without math.Min, which is not inlined (NaN stays NaN).
	bp := d.nf * pv
	if bp > 1 {
		bp = 1
	}
	o.BonferroniP = bp
}

// powInt returns x^k for k >= 0 by repeated squaring.
func powInt(x float64, k int) float64 {
	r := 1.0
	for k > 0 {
		if k&1 == 1 {
			r *= x
		}
		x *= x
		k >>= 1
	}
	return r
}

// weigh turns row i's h = x_i'(X'WX)^-1 x_i, v = (X'WX)^-1 x_i and raw
// residual e into those of the scaled row √w_i x_i of a weighted fit:
// h w_i, v √w_i, e √w_i (weights.go).
func (d *diag) weigh(i int, h float64, v []float64, e float64) (float64, float64) {
	s := d.f.sw[i]
	h *= d.f.Weights[i]
	if h > 1 {
		h = 1
	}
	for j := range v {
		v[j] *= s
	}
	return h, e * s
}

// clone returns a copy with its own scratch space, for another goroutine.
func (d *diag) clone() *diag {
	c := *d
	c.xs = make([]float64, d.p)
	c.scratch()
	return &c
}

// blockRows is the number of rows whose leverage and (X'X)^-1 x_i are
// computed together, column by column: the loops then run over rows,
// whose iterations are independent, instead of along one row's short
// dependent sums.
const blockRows = 64

// block holds one block's values, a row of blockRows per coefficient: x
// the centred rows, q = R^-T T^-T x, v = (X'X)^-1 x, and h = |q|². Rows
// past the block's end hold stale values that are computed and not read.
type block struct {
	x, q, v []vec
	h       vec
}

// vec is one quantity of a block's rows: fixed length, so the loops over
// it carry no bounds checks.
type vec = [blockRows]float64

// blocks holds the per-chunk block scratch of diagnose.
var blocks = sync.Pool{New: func() any { return new(block) }}

// init sizes b for p coefficients, reusing its space when it is enough.
func (b *block) init(p int) {
	if cap(b.x) < p {
		buf := make([]vec, 3*p)
		b.x, b.q, b.v = buf[:p:p], buf[p:2*p:2*p], buf[2*p:]
	}
	b.x, b.q, b.v = b.x[:p], b.q[:p], b.v[:p]
}

// block computes rows [lo, lo+nb) into b: the same operations in the same
// order as row, so the same values bit for bit. Two terms go into each
// pass over a sum, which keeps the order of its additions.
func (d *diag) block(b *block, lo, nb int) {
	p := d.p
	sc := &d.f.sc
	x := b.x
	for r := 0; r < nb; r++ {
		row := d.xd[(lo+r)*d.stride : (lo+r)*d.stride+p]
		x[0][r] = row[0]
		if sc.intercept {
			for j := 1; j < p; j++ {
				x[j][r] = row[j] - sc.mean[j]*row[0]
			}
		} else {
			for j := 1; j < p; j++ {
				x[j][r] = row[j]
			}
		}
	}
	// Derived columns (x^2 from x): add the low parts of their values.
	for j, l := range d.f.lo {
		if l != nil {
			xj := &x[j]
			for r := 0; r < nb; r++ {
				xj[r] += l[lo+r]
			}
		}
	}
	ri := d.riS
	h := &b.h
	*h = vec{}
	for l := 0; l < p; l++ {
		// q_l = Σ_{j<=l} riS_jl x_j, j ascending.
		q := &b.q[l]
		triSum(q, x[:l+1], ri[l:], p)
		for r := range q {
			h[r] += q[r] * q[r]
		}
	}
	m := d.f.m
	for j := 0; j < p; j++ {
		// v_j = Σ_{l>=j} M_jl q_l, l ascending.
		triSum(&b.v[j], b.q[j:], m[j*p+j:], 1)
	}
	if d.f.sw != nil {
		return // weighted: h is x'(X'WX)^-1 x, clamped by weigh
	}
	for r := range h {
		if h[r] > 1 {
			h[r] = 1
		}
	}
}

// triSum sets dst = Σ_k c[k*step]·src[k] over k in order, rounding as
// the running sum s = 0; s += c·src[k] does.
func triSum(dst *vec, src []vec, c []float64, step int) {
	a := &src[0]
	ca := c[0]
	if len(src) == 1 {
		for r := range dst {
			dst[r] = ca * a[r]
		}
		return
	}
	bb := &src[1]
	cb := c[step]
	for r := range dst {
		dst[r] = ca*a[r] + cb*bb[r]
	}
	k := 2
	for ; k+2 <= len(src); k += 2 {
		a, bb := &src[k], &src[k+1]
		ca, cb := c[k*step], c[(k+1)*step]
		for r := range dst {
			dst[r] = (dst[r] + ca*a[r]) + cb*bb[r]
		}
	}
	if k < len(src) {
		a := &src[k]
		ca := c[k*step]
		for r := range dst {
			dst[r] += ca * a[r]
		}
	}
}
