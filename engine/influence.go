package engine

import "math"

// Obs holds the diagnostics of one observation (formulas in the package
// documentation). Values that are undefined, for example every deletion
// measure of a row with leverage 1, are NaN.
type Obs struct {
	Leverage        float64   // h_ii = x_i'(X'X)^-1 x_i
	Residual        float64   // e_i = y_i - x_i'b
	StudentInternal float64   // r_i = e_i/(s√(1-h))
	StudentExternal float64   // t_i = e_i/(s_(i)√(1-h))
	Cook            float64   // D_i = r_i² h/(p(1-h))
	DFFITS          float64   // t_i √(h/(1-h))
	DFBETAS         []float64 // per coefficient, in Fit.Coef order
	COVRATIO        float64   // (s_(i)²/s²)^p/(1-h)
	OutlierP        float64   // two-sided p of t_i on n-p-1 df (unadjusted)
	BonferroniP     float64   // min(1, n·OutlierP)
}

// Influence is the per-observation table of a fit, Rows in row order.
type Influence struct {
	Fit  *Fit
	Rows []Obs
}

// Diagnose computes every observation's diagnostics in closed form from
// the fit's QR factors, in O(n p²) time: no leave-one-out refits. For each
// row, q = R^-T w_i (w_i the scaled row) gives h = |q|², and
// (X'X)^-1 x_i = T^-1 R^-1 q gives the DFBETAS. The deleted variance is
// (n-p-1)s_(i)² = RSS - e_i²/(1-h), evaluated in double-double.
func Diagnose(f *Fit) *Influence {
	n, p := f.N, f.P
	inf := &Influence{Fit: f, Rows: make([]Obs, n)}
	dfb := make([]float64, n*p)
	raw := f.x.RawMatrix()
	stride, xd := raw.Stride, raw.Data
	fp := float64(p)
	df := float64(n - p)
	df1 := float64(n - p - 1)
	s2 := f.RSS / df
	s := math.Sqrt(s2)
	// 1/sqrt(C_jj).
	kj := make([]float64, p)
	for j := 0; j < p; j++ {
		c := 0.0
		for l := 0; l < p; l++ {
			c += f.m[j*p+l] * f.m[j*p+l]
		}
		kj[j] = 1 / math.Sqrt(c)
	}
	ch := newChunking(n, p)
	R := f.r
	sc := &f.sc
	nf := float64(n)
	ch.run(func(c int) {
		lo, hi := ch.bounds(c)
		w := make([]float64, p)
		v := make([]float64, p)
		for i := lo; i < hi; i++ {
			row := xd[i*stride : i*stride+p]
			sc.toW(w, row)
			solveUpperT(R, p, w)
			h := 0.0
			for _, q := range w {
				h += q * q
			}
			solveUpper(R, p, w)
			sc.fromW(v, w)
			o := &inf.Rows[i]
			e := f.Residuals[i]
			o.Residual = e
			o.DFBETAS = dfb[i*p : (i+1)*p : (i+1)*p]
			if h > 1 {
				h = 1
			}
			o.Leverage = h
			om := 1 - h
			if om < 0x1p-46 || n-p-1 <= 0 {
				nan := math.NaN()
				if om >= 0x1p-46 {
					o.StudentInternal = e / (s * math.Sqrt(om))
					o.Cook = o.StudentInternal * o.StudentInternal * h / (fp * om)
				} else {
					o.StudentInternal, o.Cook = nan, nan
				}
				o.StudentExternal, o.DFFITS, o.COVRATIO = nan, nan, nan
				o.OutlierP, o.BonferroniP = nan, nan
				for j := range o.DFBETAS {
					o.DFBETAS[j] = nan
				}
				continue
			}
			sq := math.Sqrt(om)
			ri := e / (s * sq)
			// (n-p-1) s_(i)^2 = RSS - e^2/(1-h), in double-double.
			e2 := dd{}.addProd(e, e)
			q := e2.divDD(dd{om, 0})
			d := f.rss.addDD(q.neg()).float()
			if d < 0 {
				d = 0
			}
			s2i := d / df1
			si := math.Sqrt(s2i)
			ti := e / (si * sq)
			o.StudentInternal = ri
			o.StudentExternal = ti
			o.Cook = ri * ri * h / (fp * om)
			o.DFFITS = ti * math.Sqrt(h/om)
			scale := e / (om * si)
			for j := 0; j < p; j++ {
				o.DFBETAS[j] = v[j] * scale * kj[j]
			}
			o.COVRATIO = math.Pow(s2i/s2, fp) / om
			pv := TTail2(ti, df1)
			o.OutlierP = pv
			o.BonferroniP = math.Min(1, nf*pv)
		}
	})
	return inf
}
