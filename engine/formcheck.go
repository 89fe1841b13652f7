package engine

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/mathext"
)

// Checks of the model form.
//
// CheckForm tests the assumptions every verdict of the package rests on:
// the right terms (lack of fit), independent errors (Durbin-Watson) and
// constant variance (Breusch-Pagan), and reports the leave-one-out
// prediction error (PRESS). For a weighted fit each check is its weighted
// version, computed on the rows √w_i [x_i y_i] (weights.go): weighted sums
// of squares in the lack-of-fit test, the weighted residuals √w_i e_i in
// Durbin-Watson and Breusch-Pagan, and Σ w_i (e_i/(1-h_i))² for PRESS.

// LackOfFit is the lack-of-fit test against pure error (NIST/SEMATECH
// e-Handbook §4.4.4.3): with g distinct settings of the design row
// (g > p) and replicates (n > g),
//
//	SS_PE  = Σ w (y - ȳ_setting)²           df n - g
//	SS_LOF = RSS - SS_PE                    df g - p
//	F      = (SS_LOF/(g-p)) / (SS_PE/(n-g)),  P = P(F_{g-p, n-g} > F)
//
// the same as R's anova(fit, lm(y ~ factor(setting))). F is +Inf and P 0
// when the replicates agree exactly (SS_PE = 0) and SS_LOF > 0.
type LackOfFit struct {
	Groups      int
	PureErrorDF int
	LackOfFitDF int
	F, P        float64
}

// DurbinWatson is the Durbin-Watson test (Durbin & Watson 1950, 1951) on
// the residuals in row order:
//
//	d = Σ_{i≥2} (ẽ_i - ẽ_{i-1})² / Σ ẽ_i²   (ẽ = √w e)
//
// with P = P(D <= d) under independent normal errors, the p-value for
// positive autocorrelation. Method names how P was computed:
//
//   - DWExact (n <= DWExactRows): the exact distribution of the ratio of
//     quadratic forms, from the eigenvalues λ of M A M (M = I - H, A the
//     difference matrix), P(Σ (λ_i - d) z_i² <= 0) by Imhof's (1961)
//     inversion integral, integrated by 32-point Gauss-Legendre panels
//     (widening geometrically) until the integrand's bound falls below
//     1e-13; on the 18 reference cases it agrees with Pan's algorithm in
//     R's lmtest::dwtest(exact = TRUE) within 3.1e-9 absolute
//     (TestRFormChecks holds it to 1e-8);
//   - DWNormal (larger n): the normal approximation with the exact mean
//     and variance of d given X (Durbin & Watson 1971), as
//     lmtest::dwtest(exact = FALSE) computes it; against the exact P it
//     errs by at most 0.012 absolute on the reference cases (n = 15..84);
//     its error is of order 1/√n (common practice).
type DurbinWatson struct {
	Statistic float64
	P         float64
	Method    string
}

// Durbin-Watson p-value methods.
const (
	DWExact  = "exact (Imhof)"
	DWNormal = "normal approximation (exact moments)"
)

// DWExactRows is the largest n for which the Durbin-Watson p-value is
// computed exactly (O(n³) time: about 2 ms at n = 100, 30 ms at 250);
// above it the normal approximation. lmtest::dwtest draws the same line
// by default (exact below 100 rows).
const DWExactRows = 100

// BreuschPagan is the studentized Breusch-Pagan test (Koenker 1981):
// the squared residuals ẽ_i², centred, regressed on the model's columns
// as they enter the fit (√w_i x_i; x_i itself unweighted),
//
//	LM = n u'Hu / u'u,  u = ẽ² - mean(ẽ²),  H the fit's hat matrix,
//
// which is n R² of the auxiliary regression when the model has an
// intercept (or a group coded with every level); chi-square with DF =
// p - 1; P = P(χ²_DF > LM). It needs no auxiliary fit: u'Hu comes from
// the fit's own factors. R's lmtest::bptest(studentize = TRUE) on the
// model y√w ~ 0 + X√w (its default variance regressors, the model's own)
// computes the same.
type BreuschPagan struct {
	Statistic float64
	DF        int
	P         float64
}

// FormChecks holds the checks of one fit. A check that cannot be made is
// nil (lack of fit without replicates or with no more settings than
// coefficients; Breusch-Pagan with one coefficient or squared residuals
// all equal), an undefined number NaN.
//
// PRESS = Σ w (e_i/(1-h_i))², the sum of squared leave-one-out prediction
// errors (Allen 1974), NaN when some h_i = 1; PredictedRSquared =
// 1 - PRESS/TSS.
type FormChecks struct {
	LackOfFit         *LackOfFit
	DurbinWatson      *DurbinWatson
	BreuschPagan      *BreuschPagan
	PRESS             float64
	PredictedRSquared float64
}

// CheckForm computes the model-form checks of f. inf is f's influence
// table (for the leverages); nil computes it. It runs in O(n p²) time,
// and O(n³) for the exact Durbin-Watson p-value of a fit of at most
// DWExactRows rows.
func CheckForm(f *Fit, inf *Influence) FormChecks {
	if inf == nil {
		inf = Diagnose(f)
	}
	var fc FormChecks
	sums := formPass(f)
	fc.LackOfFit = lackOfFit(f, sums.keys)
	fc.DurbinWatson = durbinWatson(f, sums)
	fc.BreuschPagan = breuschPagan(f, sums)
	fc.PRESS, fc.PredictedRSquared = press(f, inf)
	return fc
}

// formSums is what one pass over the rows gathers for the checks (on up
// to GOMAXPROCS goroutines, per chunk, combined in chunk order).
type formSums struct {
	keys         []uint64  // hash of each raw design row
	dwNum, dwDen float64   // Σ(ẽ_i - ẽ_{i-1})², Σ ẽ_i²
	xax, axax    []float64 // X̃'AX̃ and (AX̃)'(AX̃), p x p
	g            []float64 // X̃'u, u = ẽ² - mean(ẽ²)
	uu           float64   // Σ u²
}

func formPass(f *Fit) formSums {
	n, p := f.N, f.P
	raw := f.x.RawMatrix()
	xd, stride := raw.Data, raw.Stride
	e := f.WeightedResiduals()
	mean := 0.0
	for _, v := range e {
		mean += v * v
	}
	mean /= float64(n)
	ch := newChunking(n, p)
	type part struct {
		num, den, uu float64
		xax, axax, g []float64
	}
	parts := make([]part, ch.nc)
	keys := make([]uint64, n)
	sw := f.sw
	ch.run(func(c int) {
		lo, hi := ch.bounds(c)
		pt := part{xax: make([]float64, p*p), axax: make([]float64, p*p), g: make([]float64, p)}
		ax := make([]float64, p)
		// Rows i-1, i, i+1 of X̃: views into X when unweighted, scaled
		// copies (rotating through three buffers) when weighted.
		var bufs [3][]float64
		for k := range bufs {
			bufs[k] = make([]float64, p)
		}
		rowAt := func(i, k int) []float64 {
			r := xd[i*stride : i*stride+p]
			if sw == nil {
				return r
			}
			b := bufs[k%3]
			for j, v := range r {
				b[j] = v * sw[i]
			}
			return b
		}
		var prev, cur, next []float64
		if lo > 0 {
			prev = rowAt(lo-1, lo-1)
		}
		cur = rowAt(lo, lo)
		if lo+1 < n {
			next = rowAt(lo+1, lo+1)
		}
		xax, axax, g := pt.xax, pt.axax, pt.g
		for i := lo; i < hi; i++ {
			h := uint64(14695981039346656037)
			for _, v := range xd[i*stride : i*stride+p] {
				h = (h ^ math.Float64bits(v)) * 1099511628211
				h ^= h >> 29
			}
			keys[i] = h
			cur = cur[:p]
			ax = ax[:p]
			switch {
			case n == 1:
				clear(ax)
			case i == 0:
				next = next[:p]
				for j := range ax {
					ax[j] = cur[j] - next[j]
				}
			case i == n-1:
				prev = prev[:p]
				for j := range ax {
					ax[j] = cur[j] - prev[j]
				}
			default:
				prev, next = prev[:p], next[:p]
				for j := range ax {
					ax[j] = 2*cur[j] - prev[j] - next[j]
				}
			}
			ei := e[i]
			u := ei*ei - mean
			pt.den += ei * ei
			if i > 0 {
				d := ei - e[i-1]
				pt.num += d * d
			}
			pt.uu += u * u
			// Upper halves only: X̃'AX̃ is symmetric (A is), though no
			// one row's term is.
			for j, cj := range cur {
				aj := ax[j]
				g[j] += cj * u
				xr := xax[j*p+j : (j+1)*p]
				ar := axax[j*p+j : (j+1)*p]
				axj := ax[j:]
				axj = axj[:len(xr)]
				ar = ar[:len(xr)]
				for k, v := range axj {
					xr[k] += cj * v
					ar[k] += aj * v
				}
			}
			prev, cur = cur, next
			if i+2 < n {
				next = rowAt(i+2, i+2)
			}
		}
		parts[c] = pt
	})
	s := formSums{keys: keys, xax: make([]float64, p*p), axax: make([]float64, p*p), g: make([]float64, p)}
	for _, pt := range parts {
		s.dwNum += pt.num
		s.dwDen += pt.den
		s.uu += pt.uu
		for j := range pt.xax {
			s.xax[j] += pt.xax[j]
			s.axax[j] += pt.axax[j]
		}
		for j := range pt.g {
			s.g[j] += pt.g[j]
		}
	}
	for j := 0; j < p; j++ {
		for k := 0; k < j; k++ {
			s.xax[j*p+k] = s.xax[k*p+j]
			s.axax[j*p+k] = s.axax[k*p+j]
		}
	}
	return s
}

// weightAt returns w_i (1 unweighted).
func (f *Fit) weightAt(i int) float64 {
	if f.Weights == nil {
		return 1
	}
	return f.Weights[i]
}

func press(f *Fit, inf *Influence) (float64, float64) {
	var s float64
	for i, o := range inf.Rows {
		om := 1 - o.Leverage
		if om < 0x1p-46 {
			return math.NaN(), math.NaN()
		}
		d := o.Residual / om
		s += f.weightAt(i) * d * d
	}
	return s, 1 - s/f.TSS
}

// anyRepeat reports whether two keys are equal (open addressing on a
// table twice the size of keys, rounded up to a power of two).
func anyRepeat(keys []uint64) bool {
	size := 1
	for size < 2*len(keys) {
		size <<= 1
	}
	table := make([]uint64, size)
	used := make([]bool, size)
	mask := uint64(size - 1)
	for _, k := range keys {
		h := (k * 0x9E3779B97F4A7C15) >> 7
		for j := h & mask; ; j = (j + 1) & mask {
			if !used[j] {
				used[j], table[j] = true, k
				break
			}
			if table[j] == k {
				return true
			}
		}
	}
	return false
}

func lackOfFit(f *Fit, keys []uint64) *LackOfFit {
	n, p := f.N, f.P
	raw := f.x.RawMatrix()
	rowAt := func(i int) []float64 { return raw.Data[i*raw.Stride : i*raw.Stride+p] }
	// Settings: distinct design rows. Sort the rows' hashes (LSD radix,
	// 16 bits a pass) and split the runs of equal hashes into rows that
	// are equal bit for bit.
	if !anyRepeat(keys) {
		return nil // no replicates: every setting is seen once
	}
	order := radixOrder(keys)
	gid := make([]int32, n)
	var first []int
	for a := 0; a < n; {
		b := a + 1
		for b < n && keys[order[b]] == keys[order[a]] {
			b++
		}
		start := len(first)
		for _, i := range order[a:b] {
			id := int32(-1)
			for g := start; g < len(first); g++ {
				if sameRow(rowAt(int(i)), rowAt(first[g])) {
					id = int32(g)
					break
				}
			}
			if id < 0 {
				id = int32(len(first))
				first = append(first, int(i))
			}
			gid[i] = id
		}
		a = b
	}
	g := len(first)
	if g <= p || n <= g {
		return nil
	}
	sw := make([]float64, g)
	swy := make([]dd, g)
	for i, id := range gid {
		w := f.weightAt(i)
		sw[id] += w
		swy[id] = swy[id].addProd(w, f.y[i])
	}
	mean := make([]float64, g)
	for k := range mean {
		mean[k] = swy[k].float() / sw[k]
	}
	var pe dd
	for i, id := range gid {
		d := f.y[i] - mean[id]
		pe = pe.addProd(f.weightAt(i)*d, d)
	}
	sspe := pe.float()
	sslof := f.rss.addDD(pe.neg()).float()
	if sslof < 0 {
		sslof = 0
	}
	l := &LackOfFit{Groups: g, PureErrorDF: n - g, LackOfFitDF: g - p}
	d1, d2 := float64(g-p), float64(n-g)
	switch {
	case sspe > 0:
		l.F = (sslof / d1) / (sspe / d2)
		l.P = FSurvival(l.F, d1, d2)
	case sslof > 0:
		l.F, l.P = math.Inf(1), 0
	default:
		l.F, l.P = math.NaN(), math.NaN()
	}
	return l
}

// radixOrder returns the indices of keys in ascending key order (a
// stable LSD radix sort, 16 bits a pass).
func radixOrder(keys []uint64) []int32 {
	n := len(keys)
	a := make([]int32, n)
	b := make([]int32, n)
	for i := range a {
		a[i] = int32(i)
	}
	var count [1 << 16]int32
	for shift := 0; shift < 64; shift += 16 {
		clear(count[:])
		for _, k := range keys {
			count[(k>>shift)&0xffff]++
		}
		sum := int32(0)
		for d, c := range count {
			count[d] = sum
			sum += c
		}
		for _, i := range a {
			d := (keys[i] >> shift) & 0xffff
			b[count[d]] = i
			count[d]++
		}
		a, b = b, a
	}
	return a
}

func sameRow(a, b []float64) bool {
	for j := range a {
		if math.Float64bits(a[j]) != math.Float64bits(b[j]) {
			return false
		}
	}
	return true
}

// scaledRow writes √w_i x_i into dst.
func (f *Fit) scaledRow(dst []float64, i int) {
	raw := f.x.RawMatrix()
	row := raw.Data[i*raw.Stride : i*raw.Stride+f.P]
	s := 1.0
	if f.sw != nil {
		s = f.sw[i]
	}
	for j, v := range row {
		dst[j] = v * s
	}
}

func durbinWatson(f *Fit, s formSums) *DurbinWatson {
	n := f.N
	if s.dwDen == 0 {
		return &DurbinWatson{Statistic: math.NaN(), P: math.NaN(), Method: DWNormal}
	}
	d := s.dwNum / s.dwDen
	if n <= DWExactRows {
		if pv, ok := dwExact(f, d); ok {
			return &DurbinWatson{Statistic: d, P: pv, Method: DWExact}
		}
	}
	return &DurbinWatson{Statistic: d, P: dwNormal(f, s, d), Method: DWNormal}
}

// dwNormal is P(D <= d) by the normal approximation with the exact
// moments of D (Durbin & Watson 1971): with X̃ the scaled design,
// C = (X̃'X̃)^-1 and A the difference matrix,
//
//	P = 2(n-1) - tr(X̃'AX̃ C),  Q = 2(3n-4) - 2 tr((AX̃)'(AX̃) C) + tr((X̃'AX̃ C)²)
//	E d = P/(n-p),  Var d = 2 (Q - P E d) / ((n-p)(n-p+2)).
func dwNormal(f *Fit, s formSums, d float64) float64 {
	n, p := f.N, f.P
	if n < 5 || n-p <= 0 {
		return math.NaN()
	}
	xax, axax := s.xax, s.axax
	C := f.Unscaled()
	m := make([]float64, p*p) // X̃'AX̃ C
	for j := 0; j < p; j++ {
		for k := 0; k < p; k++ {
			v := 0.0
			for l := 0; l < p; l++ {
				v += xax[j*p+l] * C.At(l, k)
			}
			m[j*p+k] = v
		}
	}
	tr1, tr2, tr3 := 0.0, 0.0, 0.0
	for j := 0; j < p; j++ {
		tr1 += m[j*p+j]
		for k := 0; k < p; k++ {
			tr2 += axax[j*p+k] * C.At(k, j)
			tr3 += m[j*p+k] * m[k*p+j]
		}
	}
	fn, fk := float64(n), float64(p)
	P := 2*(fn-1) - tr1
	Q := 2*(3*fn-4) - 2*tr2 + tr3
	mean := P / (fn - fk)
	v := 2 / ((fn - fk) * (fn - fk + 2)) * (Q - P*mean)
	if !(v > 0) {
		return math.NaN()
	}
	z := (d - mean) / math.Sqrt(v)
	return 0.5 * math.Erfc(-z/math.Sqrt2)
}

// dwExact is P(D <= d) from the eigenvalues of M A M by Imhof's integral.
func dwExact(f *Fit, d float64) (float64, bool) {
	n, p := f.N, f.P
	xs := mat.NewDense(n, p, nil)
	row := make([]float64, p)
	for i := 0; i < n; i++ {
		f.scaledRow(row, i)
		xs.SetRow(i, row)
	}
	var qr mat.QR
	qr.Factorize(xs)
	var q mat.Dense
	qr.QTo(&q)
	// M = I - Q1 Q1' (Q1 the first p columns of Q).
	q1 := q.Slice(0, n, 0, p)
	var h mat.Dense
	h.Mul(q1, q1.T())
	M := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			v := -h.At(i, j)
			if i == j {
				v++
			}
			M.Set(i, j, v)
		}
	}
	// MA (A tridiagonal: 1, 2, ..., 2, 1 on the diagonal, -1 beside it).
	MA := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			a := 2.0
			if j == 0 || j == n-1 {
				a = 1
			}
			s := a * M.At(i, j)
			if j > 0 {
				s -= M.At(i, j-1)
			}
			if j < n-1 {
				s -= M.At(i, j+1)
			}
			MA.Set(i, j, s)
		}
	}
	var mam mat.Dense
	mam.Mul(MA, M)
	sym := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			sym.SetSym(i, j, 0.5*(mam.At(i, j)+mam.At(j, i)))
		}
	}
	var es mat.EigenSym
	if !es.Factorize(sym, false) {
		return 0, false
	}
	ev := es.Values(nil)
	sort.Sort(sort.Reverse(sort.Float64Slice(ev)))
	var c []float64
	for _, l := range ev[:n-p] {
		if l > 1e-10 {
			c = append(c, l-d)
		}
	}
	if len(c) == 0 {
		return 0, false
	}
	pv := imhofBelowZero(c)
	if pv < 0 {
		pv = 0
	}
	if pv > 1 {
		pv = 1
	}
	return pv, !math.IsNaN(pv)
}

// imhofBelowZero returns P(Σ c_i z_i² <= 0), z_i independent standard
// normal, by Imhof's (1961) formula
//
//	P = 1/2 - (1/π) ∫_0^∞ sin θ(u) / (u ρ(u)) du,
//	θ(u) = ½ Σ atan(c_i u),  ρ(u) = Π (1 + c_i² u²)^(1/4),
//
// integrated by 32-point Gauss-Legendre panels of growing width up to
// where the integrand's bound 1/(u ρ(u)) has fallen below 1e-13.
func imhofBelowZero(c []float64) float64 {
	big := 0.0
	for _, v := range c {
		big = math.Max(big, math.Abs(v))
	}
	integrand := func(u float64) float64 {
		if u == 0 {
			s := 0.0
			for _, v := range c {
				s += v
			}
			return s / 2
		}
		th, lr := 0.0, 0.0
		for _, v := range c {
			th += math.Atan(v * u)
			lr += math.Log1p(v * v * u * u)
		}
		return math.Sin(th/2) / (u * math.Exp(lr/4))
	}
	bound := func(u float64) float64 {
		lr := 0.0
		for _, v := range c {
			lr += math.Log1p(v * v * u * u)
		}
		return 1 / (u * math.Exp(lr/4))
	}
	// Panels of width h, doubling every 8 panels, from 0.
	h := 0.05 / big
	total := 0.0
	a := 0.0
	for k := 0; k < 4000; k++ {
		b := a + h
		total += glPanel(integrand, a, b)
		a = b
		if bound(a) < 1e-13 && a*big > 1 {
			break
		}
		if k%8 == 7 {
			h *= 2
		}
	}
	return 0.5 - total/math.Pi
}

// glPanel integrates fn over [a, b] by 32-point Gauss-Legendre.
func glPanel(fn func(float64) float64, a, b float64) float64 {
	mid, half := (a+b)/2, (b-a)/2
	s := 0.0
	for k, x := range gl32x {
		s += gl32w[k] * (fn(mid+half*x) + fn(mid-half*x))
	}
	return s * half
}

// 32-point Gauss-Legendre nodes (positive half) and weights, computed at
// init by Newton's method on the Legendre polynomial.
var gl32x, gl32w = legendre(32)

func legendre(m int) ([]float64, []float64) {
	xs := make([]float64, m/2)
	ws := make([]float64, m/2)
	for i := 0; i < m/2; i++ {
		x := math.Cos(math.Pi * (float64(i) + 0.75) / (float64(m) + 0.5))
		var dp float64
		for it := 0; it < 100; it++ {
			p0, p1 := 1.0, x
			for k := 2; k <= m; k++ {
				p0, p1 = p1, ((2*float64(k)-1)*x*p1-float64(k-1)*p0)/float64(k)
			}
			dp = float64(m) * (x*p1 - p0) / (x*x - 1)
			dx := p1 / dp
			x -= dx
			if math.Abs(dx) < 1e-16 {
				break
			}
		}
		p0, p1 := 1.0, x
		for k := 2; k <= m; k++ {
			p0, p1 = p1, ((2*float64(k)-1)*x*p1-float64(k-1)*p0)/float64(k)
		}
		dp = float64(m) * (x*p1 - p0) / (x*x - 1)
		xs[i] = x
		ws[i] = 2 / ((1 - x*x) * dp * dp)
	}
	return xs, ws
}

func breuschPagan(f *Fit, s formSums) *BreuschPagan {
	n, p := f.N, f.P
	if p < 2 || !(s.uu > 0) {
		return nil
	}
	// Explained sum of squares of u on the fit's own columns √w x:
	// u'Hu = |M' X̃'u|² with (X̃'X̃)^-1 = M M' (M upper triangular).
	ess := 0.0
	for l := 0; l < p; l++ {
		q := 0.0
		for j := 0; j <= l; j++ {
			q += f.m[j*p+l] * s.g[j]
		}
		ess += q * q
	}
	lm := float64(n) * ess / s.uu
	df := p - 1
	return &BreuschPagan{Statistic: lm, DF: df, P: mathext.GammaIncRegComp(float64(df)/2, lm/2)}
}
