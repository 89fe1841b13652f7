package engine

import (
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

const bigPrec = 300 // bits for big.Float square roots

// ratMat is a dense matrix of exact rationals.
type ratMat [][]*big.Rat

func newRatMat(r, c int) ratMat {
	m := make(ratMat, r)
	for i := range m {
		m[i] = make([]*big.Rat, c)
		for j := range m[i] {
			m[i][j] = new(big.Rat)
		}
	}
	return m
}

// ratInverse returns the inverse of a square rational matrix by
// Gauss-Jordan elimination (exact).
func ratInverse(a ratMat) ratMat {
	n := len(a)
	w := newRatMat(n, 2*n)
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			w[i][j].Set(a[i][j])
		}
		w[i][n+i].SetInt64(1)
	}
	t := new(big.Rat)
	for c := 0; c < n; c++ {
		piv := c
		for piv < n && w[piv][c].Sign() == 0 {
			piv++
		}
		w[c], w[piv] = w[piv], w[c]
		inv := new(big.Rat).Inv(w[c][c])
		for j := range w[c] {
			w[c][j].Mul(w[c][j], inv)
		}
		for r := 0; r < n; r++ {
			if r == c || w[r][c].Sign() == 0 {
				continue
			}
			f := new(big.Rat).Set(w[r][c])
			for j := range w[r] {
				t.Mul(f, w[c][j])
				w[r][j].Sub(w[r][j], t)
			}
		}
	}
	out := newRatMat(n, n)
	for i := range out {
		for j := range out[i] {
			out[i][j].Set(w[i][n+j])
		}
	}
	return out
}

func bigSqrt(r *big.Rat) *big.Float {
	f := new(big.Float).SetPrec(bigPrec).SetRat(r)
	return f.Sqrt(f)
}

func ratFloat(r *big.Rat) *big.Float { return new(big.Float).SetPrec(bigPrec).SetRat(r) }

// exactInfluence computes the fit and every diagnostic of X, y in exact
// rational arithmetic (square roots in 300-bit big.Float). It is the
// oracle: it follows the textbook formulas (CHECKS.md §A2) directly, with
// (X'X)^-1 formed exactly.
type exactObs struct {
	h, e, r, t, cook, dffits, covratio float64
	dfbetas                            []float64
}

func exactInfluence(X *mat.Dense, y []float64) (b []float64, rss float64, obs []exactObs) {
	ef := exactInfluenceRat(denseRat(X), floatsRat(y))
	return ef.b, ef.rss, ef.obs
}

// exactFit is the oracle's fit: coefficients, standard errors, (X'X)^-1,
// RSS, TSS (centred when the design's first column is all ones) and every
// row's diagnostics, each rounded once from its exact value.
type exactFit struct {
	b, se    []float64
	c        [][]float64
	br       []*big.Rat // b exactly
	cr       ratMat     // (X'X)^-1 exactly
	rss, tss float64
	obs      []exactObs
}

// exactInfluenceRat is exactInfluence on an exact rational design xr and
// response yr (for designs whose terms, such as x^3, are not exact in
// double precision).
func exactInfluenceRat(xr ratMat, yr []*big.Rat) exactFit {
	n, p := len(xr), len(xr[0])
	t := new(big.Rat)
	xtx := newRatMat(p, p)
	xty := make([]*big.Rat, p)
	for j := range xty {
		xty[j] = new(big.Rat)
	}
	for i := 0; i < n; i++ {
		for j := 0; j < p; j++ {
			for k := 0; k < p; k++ {
				xtx[j][k].Add(xtx[j][k], t.Mul(xr[i][j], xr[i][k]))
			}
			xty[j].Add(xty[j], t.Mul(xr[i][j], yr[i]))
		}
	}
	C := ratInverse(xtx)
	br := make([]*big.Rat, p)
	for j := 0; j < p; j++ {
		br[j] = new(big.Rat)
		for k := 0; k < p; k++ {
			br[j].Add(br[j], t.Mul(C[j][k], xty[k]))
		}
	}
	e := make([]*big.Rat, n)
	rssR := new(big.Rat)
	for i := 0; i < n; i++ {
		e[i] = new(big.Rat).Set(yr[i])
		for j := 0; j < p; j++ {
			e[i].Sub(e[i], t.Mul(xr[i][j], br[j]))
		}
		rssR.Add(rssR, t.Mul(e[i], e[i]))
	}
	// TSS: centred when column 0 is all ones (an intercept).
	ybar := new(big.Rat)
	icpt := true
	for i := 0; i < n; i++ {
		icpt = icpt && xr[i][0].Cmp(big.NewRat(1, 1)) == 0
		ybar.Add(ybar, yr[i])
	}
	ybar.Quo(ybar, big.NewRat(int64(n), 1))
	if !icpt {
		ybar.SetInt64(0)
	}
	tssR := new(big.Rat)
	for i := 0; i < n; i++ {
		d := new(big.Rat).Sub(yr[i], ybar)
		tssR.Add(tssR, d.Mul(d, d))
	}
	var obs []exactObs
	np := big.NewRat(int64(n-p), 1)
	np1 := big.NewRat(int64(n-p-1), 1)
	pr := big.NewRat(int64(p), 1)
	one := big.NewRat(1, 1)
	s2 := new(big.Rat).Quo(rssR, np)
	for i := 0; i < n; i++ {
		cx := make([]*big.Rat, p)
		h := new(big.Rat)
		for j := 0; j < p; j++ {
			cx[j] = new(big.Rat)
			for k := 0; k < p; k++ {
				cx[j].Add(cx[j], t.Mul(C[j][k], xr[i][k]))
			}
			h.Add(h, t.Mul(xr[i][j], cx[j]))
		}
		om := new(big.Rat).Sub(one, h)
		e2 := new(big.Rat).Mul(e[i], e[i])
		// s_(i)^2 = (RSS - e^2/(1-h))/(n-p-1)
		s2i := new(big.Rat).Sub(rssR, new(big.Rat).Quo(e2, om))
		s2i.Quo(s2i, np1)
		ef := ratFloat(e[i])
		sqom := bigSqrt(om)
		// r = e/(s sqrt(1-h)), t = e/(s_(i) sqrt(1-h))
		rden := new(big.Float).Mul(bigSqrt(s2), sqom)
		tden := new(big.Float).Mul(bigSqrt(s2i), sqom)
		rv, _ := new(big.Float).Quo(ef, rden).Float64()
		tvb := new(big.Float).Quo(ef, tden)
		tv, _ := tvb.Float64()
		// D = e^2 h / (p s^2 (1-h)^2)
		d := new(big.Rat).Mul(e2, h)
		den := new(big.Rat).Mul(pr, s2)
		den.Mul(den, om).Mul(den, om)
		d.Quo(d, den)
		dv, _ := d.Float64()
		// DFFITS = t sqrt(h/(1-h))
		dff, _ := new(big.Float).Mul(tvb, bigSqrt(new(big.Rat).Quo(h, om))).Float64()
		// COVRATIO = (s_(i)^2/s^2)^p/(1-h), the power in 300-bit
		// arithmetic (relative error below p·2^-300; an exact rational
		// power is needlessly slow).
		cr := ratFloat(new(big.Rat).Quo(s2i, s2))
		pw := new(big.Float).SetPrec(bigPrec).SetInt64(1)
		for k := 0; k < p; k++ {
			pw.Mul(pw, cr)
		}
		pw.Quo(pw, ratFloat(om))
		crv, _ := pw.Float64()
		// DFBETAS_j = (C x)_j e / ((1-h) s_(i) sqrt(C_jj))
		dfb := make([]float64, p)
		for j := 0; j < p; j++ {
			num := ratFloat(new(big.Rat).Mul(cx[j], e[i]))
			dn := new(big.Float).Mul(ratFloat(om), bigSqrt(s2i))
			dn.Mul(dn, bigSqrt(C[j][j]))
			dfb[j], _ = new(big.Float).Quo(num, dn).Float64()
		}
		hv, _ := h.Float64()
		evf, _ := e[i].Float64()
		obs = append(obs, exactObs{h: hv, e: evf, r: rv, t: tv, cook: dv, dffits: dff, covratio: crv, dfbetas: dfb})
	}
	out := exactFit{b: make([]float64, p), se: make([]float64, p), c: make([][]float64, p), obs: obs, br: br, cr: C}
	for j := range out.b {
		out.b[j], _ = br[j].Float64()
		v := new(big.Rat).Mul(s2, C[j][j])
		out.se[j], _ = bigSqrt(v).Float64()
		out.c[j] = make([]float64, p)
		for k := range out.c[j] {
			out.c[j][k], _ = C[j][k].Float64()
		}
	}
	out.rss, _ = rssR.Float64()
	out.tss, _ = tssR.Float64()
	return out
}

func relErr(got, want float64) float64 {
	if got == want {
		return 0
	}
	return math.Abs(got-want) / math.Max(math.Abs(want), 1e-300)
}

// TestExactOracle compares every measure with the exact rational oracle on
// small well-conditioned problems (seeded random data, a fact-free check
// of the closed forms): 1e-12 relative. Residuals are compared relative to
// the residual scale sigma, since a residual can be arbitrarily close to 0,
// and so are the measures proportional to a residual (see cond below).
func TestExactOracle(t *testing.T) {
	for seed := uint64(1); seed <= 6; seed++ {
		n, p := 8+int(seed)*3, 2+int(seed)%3
		t.Run(fmt.Sprintf("seed=%d/n=%d/p=%d", seed, n, p), func(t *testing.T) {
			m, X, y := randomProblem(t, seed, n, p)
			f, err := Refit(m, X, y)
			if err != nil {
				t.Fatal(err)
			}
			inf := Diagnose(f)
			b, rss, obs := exactInfluence(X, y)
			const tol = 1e-12
			for j := range b {
				if e := relErr(f.Coef[j].Estimate, b[j]); e > tol {
					t.Errorf("b%d rel err %.1e", j, e)
				}
			}
			if e := relErr(f.RSS, rss); e > tol {
				t.Errorf("RSS rel err %.1e", e)
			}
			for i, o := range inf.Rows {
				w := obs[i]
				// A residual is known to about eps·|y| absolutely (the
				// estimates are rounded to double), so a measure
				// proportional to e_i (or e_i², Cook) is compared relative
				// to its value at a one-sigma residual when e_i is small:
				// that is the measure's own condition number in e_i.
				cond := math.Max(1, f.Sigma/math.Abs(w.e))
				cmpE := func(name string, got, want float64) {
					if e := relErr(got, want); e > tol*cond {
						t.Errorf("row %d %s = %.17g, exact %.17g (rel %.1e, allowed %.1e)", i, name, got, want, e, tol*cond)
					}
				}
				cmp := func(name string, got, want float64) {
					if e := relErr(got, want); e > tol {
						t.Errorf("row %d %s = %.17g, exact %.17g (rel %.1e)", i, name, got, want, e)
					}
				}
				if e := math.Abs(o.Residual-w.e) / f.Sigma; e > tol {
					t.Errorf("row %d residual off by %.1e sigma", i, e)
				}
				cmp("h", o.Leverage, w.h)
				cmpE("r", o.StudentInternal, w.r)
				cmpE("t", o.StudentExternal, w.t)
				cmpE("cook", o.Cook, w.cook)
				cmpE("dffits", o.DFFITS, w.dffits)
				cmp("covratio", o.COVRATIO, w.covratio)
				for j := range w.dfbetas {
					cmpE(fmt.Sprintf("dfbetas[%d]", j), inf.DFBETASRow(i)[j], w.dfbetas[j])
				}
			}
		})
	}
}

// TestFilipExactSolution: on NIST Filip (scaled condition number ~4e9) the
// refined fit equals, to 14 digits, the exact least-squares solution of
// the data it was given, computed in rational arithmetic: x as read into
// double precision and its powers x^2..x^10 formed exactly (the model's
// terms), not rounded to double as the design matrix holds them. (With the
// rounded powers the exact solution itself is 7.6 digits from the
// certified values: that rounding alone moves the coefficients by 2e-8.)
// The remaining distance to the certified values (TestNIST) is then the
// rounding of the data to double precision, not the method.
func TestFilipExactSolution(t *testing.T) {
	d := loadNIST(t, "Filip")
	m, cols := d.model(t)
	X, y, err := m.Design(cols)
	if err != nil {
		t.Fatal(err)
	}
	f, err := Refit(m, X, y)
	if err != nil {
		t.Fatal(err)
	}
	b := exactLSRat(polyRat(cols["x"], d.Degree), floatsRat(y))
	for j := range b {
		if l := lre(f.Coef[j].Estimate, b[j]); l < 14 {
			t.Errorf("b%d agrees with the exact solution to %.1f digits, want >= 14", j, l)
		}
	}
}

// polyRat returns the exact design 1, x, ..., x^deg of the doubles x.
func polyRat(x []float64, deg int) ratMat {
	m := newRatMat(len(x), deg+1)
	for i, v := range x {
		xv := new(big.Rat).SetFloat64(v)
		m[i][0].SetInt64(1)
		for k := 1; k <= deg; k++ {
			m[i][k].Mul(m[i][k-1], xv)
		}
	}
	return m
}

// floatsRat returns the doubles v as exact rationals.
func floatsRat(v []float64) []*big.Rat {
	out := make([]*big.Rat, len(v))
	for i, x := range v {
		out[i] = new(big.Rat).SetFloat64(x)
	}
	return out
}

// denseRat returns the doubles of X as exact rationals.
func denseRat(X *mat.Dense) ratMat {
	n, p := X.Dims()
	m := newRatMat(n, p)
	for i := 0; i < n; i++ {
		for j := 0; j < p; j++ {
			m[i][j].SetFloat64(X.At(i, j))
		}
	}
	return m
}

// exactLSRat solves the normal equations of the exact design xr and
// response yr exactly.
func exactLSRat(xr ratMat, yr []*big.Rat) []float64 {
	n, p := len(xr), len(xr[0])
	A := newRatMat(p, p)
	rhs := make([]*big.Rat, p)
	for j := range rhs {
		rhs[j] = new(big.Rat)
	}
	t := new(big.Rat)
	for i := 0; i < n; i++ {
		for j := 0; j < p; j++ {
			for k := 0; k < p; k++ {
				A[j][k].Add(A[j][k], t.Mul(xr[i][j], xr[i][k]))
			}
			rhs[j].Add(rhs[j], t.Mul(xr[i][j], yr[i]))
		}
	}
	C := ratInverse(A)
	out := make([]float64, p)
	for j := 0; j < p; j++ {
		s := new(big.Rat)
		for k := 0; k < p; k++ {
			s.Add(s, t.Mul(C[j][k], rhs[k]))
		}
		out[j], _ = s.Float64()
	}
	return out
}

// TestLeaveOneOut: every closed-form measure equals its definition by
// brute-force deletion of the row and a refit (Belsley, Kuh & Welsch 1980
// definitions; seeded random problems), to 1e-8 relative.
func TestLeaveOneOut(t *testing.T) {
	for seed := uint64(10); seed < 14; seed++ {
		n, p := 15+int(seed), 3+int(seed)%3
		m, X, y := randomProblem(t, seed, n, p)
		// A high-leverage row and an outlier make the check sharper.
		X.Set(0, 1, X.At(0, 1)+25)
		y[3] += 6
		f, err := Refit(m, X, y)
		if err != nil {
			t.Fatal(err)
		}
		inf := Diagnose(f)
		C := f.Unscaled()
		s2 := f.Sigma * f.Sigma
		detFull := mat.Det(C) * math.Pow(s2, float64(p))
		for i := 0; i < n; i++ {
			Xi := mat.NewDense(n-1, p, nil)
			yi := make([]float64, 0, n-1)
			r := 0
			for k := 0; k < n; k++ {
				if k == i {
					continue
				}
				Xi.SetRow(r, X.RawRowView(k))
				yi = append(yi, y[k])
				r++
			}
			fi, err := Refit(m, Xi, yi)
			if err != nil {
				t.Fatal(err)
			}
			xi := X.RawRowView(i)
			yhatI, _ := fi.Predict(xi)
			yhat := f.Fitted[i]
			si := fi.Sigma
			o := inf.Rows[i]
			h := 1 - f.Residuals[i]/(y[i]-yhatI) // e_(i) = e_i/(1-h)
			want := map[string]float64{
				"h":        h,
				"t":        (y[i] - yhatI) / (si * math.Sqrt(1+fi.Leverage(xi))),
				"dffits":   (yhat - yhatI) / (si * math.Sqrt(h)),
				"covratio": mat.Det(fi.Unscaled()) * math.Pow(si*si, float64(p)) / detFull,
			}
			// Cook's D = |X(b - b_(i))|^2 / (p s^2).
			db := make([]float64, p)
			for j := range db {
				db[j] = f.Coef[j].Estimate - fi.Coef[j].Estimate
			}
			var q float64
			for k := 0; k < n; k++ {
				row := X.RawRowView(k)
				v := 0.0
				for j := range db {
					v += row[j] * db[j]
				}
				q += v * v
			}
			want["cook"] = q / (float64(p) * s2)
			got := map[string]float64{"h": o.Leverage, "t": o.StudentExternal, "dffits": o.DFFITS,
				"covratio": o.COVRATIO, "cook": o.Cook}
			for k, w := range want {
				if e := relErr(got[k], w); e > 1e-8 {
					t.Errorf("seed %d row %d %s = %.12g, leave-one-out %.12g (rel %.1e)", seed, i, k, got[k], w, e)
				}
			}
			for j := range db {
				w := db[j] / (si * math.Sqrt(C.At(j, j)))
				if e := relErr(inf.DFBETASRow(i)[j], w); e > 1e-8 {
					t.Errorf("seed %d row %d dfbetas[%d] = %.12g, leave-one-out %.12g", seed, i, j, inf.DFBETASRow(i)[j], w)
				}
			}
		}
	}
}

// TestLeverageIdentities: Σh = p (Hoaglin & Welsch 1978; common practice)
// on random problems, and a 2^4 factorial in ±1 coding with the main
// effects and one two-factor interaction gives every run leverage p/n
// (orthogonal design: X'X = nI; published design result).
func TestLeverageIdentities(t *testing.T) {
	for seed := uint64(20); seed < 25; seed++ {
		n, p := 50+int(seed)*7, 2+int(seed)%5
		m, X, y := randomProblem(t, seed, n, p)
		f, err := Refit(m, X, y)
		if err != nil {
			t.Fatal(err)
		}
		sh := 0.0
		for _, o := range Diagnose(f).Rows {
			sh += o.Leverage
		}
		if math.Abs(sh-float64(p)) > 1e-12*float64(p) {
			t.Errorf("seed %d: Σh = %.15f, want %d", seed, sh, p)
		}
	}
	cols := map[string][]float64{}
	names := []string{"a", "b", "c", "d"}
	rng := rand.New(rand.NewPCG(3, 3))
	for run := 0; run < 16; run++ {
		for k, name := range names {
			v := -1.0
			if run>>k&1 == 1 {
				v = 1
			}
			cols[name] = append(cols[name], v)
		}
		cols["y"] = append(cols["y"], rng.NormFloat64())
	}
	m, err := NewModel("y", []string{"a", "b", "c", "d", "a*b"}, true)
	if err != nil {
		t.Fatal(err)
	}
	X, y, err := m.Design(cols)
	if err != nil {
		t.Fatal(err)
	}
	f, err := Refit(m, X, y)
	if err != nil {
		t.Fatal(err)
	}
	for i, o := range Diagnose(f).Rows {
		if math.Abs(o.Leverage-6.0/16) > 1e-15 {
			t.Errorf("run %d: h = %.17g, want p/n = 0.375", i, o.Leverage)
		}
	}
	if math.Abs(f.Condition-1) > 1e-12 {
		t.Errorf("orthogonal design: condition %.15g, want 1", f.Condition)
	}
	for term, v := range f.VIF {
		if math.Abs(v-1) > 1e-12 {
			t.Errorf("VIF[%s] = %.15g, want 1", term, v)
		}
	}
}

// tTail2Even computes P(|T_nu| > t) for even nu in big.Float from the
// closed form (Abramowitz & Stegun 26.7.3): with c² = nu/(nu+t²),
// sinθ = t/sqrt(nu+t²), A = sinθ Σ_{k=0}^{nu/2-1} (1·3···(2k-1))/(2·4···2k) c^{2k},
// P = 1 - A, evaluated at 1200 bits so the cancellation is harmless.
func tTail2Even(t *big.Float, nu int) *big.Float {
	const prec = 1200
	tt := new(big.Float).SetPrec(prec).Set(t)
	t2 := new(big.Float).SetPrec(prec).Mul(tt, tt)
	den := new(big.Float).SetPrec(prec).Add(t2, new(big.Float).SetPrec(prec).SetInt64(int64(nu)))
	c2 := new(big.Float).SetPrec(prec).Quo(new(big.Float).SetPrec(prec).SetInt64(int64(nu)), den)
	sq := new(big.Float).SetPrec(prec).Sqrt(den)
	sin := new(big.Float).SetPrec(prec).Quo(tt, sq)
	sum := new(big.Float).SetPrec(prec).SetInt64(1)
	term := new(big.Float).SetPrec(prec).SetInt64(1)
	for k := 1; k < nu/2; k++ {
		term.Mul(term, c2)
		term.Mul(term, new(big.Float).SetPrec(prec).SetInt64(int64(2*k-1)))
		term.Quo(term, new(big.Float).SetPrec(prec).SetInt64(int64(2*k)))
		sum.Add(sum, term)
	}
	a := new(big.Float).SetPrec(prec).Mul(sin, sum)
	return a.Sub(new(big.Float).SetPrec(prec).SetInt64(1), a)
}

// TestTinyTail: a straight line with one huge outlier gives a Bonferroni p
// far below 1e-16; it must match the closed-form tail evaluated in
// 1200-bit arithmetic at the exact (rational-oracle) t, to 1e-10 relative.
// Independent check of the tail formula itself: R 4.2.2 2*pt(-50, 10) =
// 2.4743103293026876e-13 (TestTTail2).
func TestTinyTail(t *testing.T) {
	n := 15 // df = n - p - 1 = 12, even
	x := make([]float64, n)
	y := make([]float64, n)
	for i := range x {
		x[i] = float64(i)
		y[i] = 1 + 2*x[i] + 0.01*math.Cos(float64(3*i))
	}
	y[5] += 1e3
	f := fitXY(t, x, y)
	inf := Diagnose(f)
	_, _, obs := exactInfluence(f.X(), y)
	o := inf.Rows[5]
	if e := relErr(o.StudentExternal, obs[5].t); e > 1e-12 {
		t.Fatalf("t = %.17g, exact %.17g", o.StudentExternal, obs[5].t)
	}
	ref := tTail2Even(new(big.Float).SetFloat64(obs[5].t), n-3)
	want, _ := ref.Float64()
	if !(want < 1e-30) {
		t.Fatalf("test data too tame: exact p = %g", want)
	}
	if e := relErr(o.OutlierP, want); e > 1e-10 {
		t.Errorf("outlier p = %.17g, exact %.17g (rel %.1e)", o.OutlierP, want, e)
	}
	if e := relErr(o.BonferroniP, float64(n)*want); e > 1e-10 {
		t.Errorf("Bonferroni p = %.17g, want %.17g", o.BonferroniP, float64(n)*want)
	}
	t.Logf("t = %.6g, Bonferroni p = %.6g", o.StudentExternal, o.BonferroniP)
}

// exactDesign returns the design of m on the columns in exact rational
// arithmetic: each term the exact product of its factors' powers (no log
// terms), so that x^3 is the cube of the double x, not its rounding.
func exactDesign(tb testing.TB, m Model, cols map[string][]float64) ratMat {
	tb.Helper()
	n := len(cols[m.Response])
	off := 0
	if m.Intercept {
		off = 1
	}
	xr := newRatMat(n, m.P())
	for i := 0; i < n; i++ {
		if m.Intercept {
			xr[i][0].SetInt64(1)
		}
		for k, t := range m.Terms {
			v := big.NewRat(1, 1)
			for _, f := range t.Factors {
				if f.Log {
					tb.Fatalf("exactDesign: log term %s", t.Text)
				}
				x := new(big.Rat).SetFloat64(cols[f.Column][i])
				for q := 0; q < f.Power; q++ {
					v.Mul(v, x)
				}
			}
			xr[i][k+off].Set(v)
		}
	}
	return xr
}

// illCase is one ill-conditioned oracle case: a model, seeded columns and
// the range its scaled condition number must fall in.
type illCase struct {
	name           string
	terms          []string
	cols           func(rng *rand.Rand) map[string][]float64
	condLo, condHi float64
}

// polyTerms returns x, x^2, ..., x^deg in the term notation (x^9*x for
// x^10).
func polyTerms(deg int) []string {
	var terms []string
	for k := 1; k <= deg; k++ {
		switch {
		case k == 1:
			terms = append(terms, "x")
		case k <= 9:
			terms = append(terms, fmt.Sprintf("x^%d", k))
		default:
			terms = append(terms, fmt.Sprintf("x^9*x^%d", k-9))
		}
	}
	return terms
}

// polyCols returns n readings x uniform on [lo, hi] (all 53 bits used, so
// that no power above the first is exact in double precision) and a
// response that is a smooth function of the centred x plus noise.
func polyCols(n int, lo, hi float64, coef []float64, noise float64) func(rng *rand.Rand) map[string][]float64 {
	return func(rng *rand.Rand) map[string][]float64 {
		x := make([]float64, n)
		y := make([]float64, n)
		c := (lo + hi) / 2
		for i := range x {
			x[i] = lo + (hi-lo)*rng.Float64()
			u := (x[i] - c) / (hi - lo)
			s, pw := 0.0, 1.0
			for _, a := range coef {
				s += a * pw
				pw *= u
			}
			y[i] = s + noise*rng.NormFloat64()
		}
		return map[string][]float64{"x": x, "y": y}
	}
}

// illCases: the ill-conditioned cases of the exact oracle. The near-
// collinear pair and the uncentred cubic and quartic on readings in
// 1000..1010 are the three cases that a binary64 fit misses at 1e-9
// (residuals from rounded coefficients, leverage to κ·eps); the degree-10
// polynomial on uncentred data is the shape of NIST Filip.
var illCases = []illCase{
	{
		name: "collinear pair", terms: []string{"x1", "x2"},
		cols: func(rng *rand.Rand) map[string][]float64 {
			n := 40
			x1, x2, y := make([]float64, n), make([]float64, n), make([]float64, n)
			for i := range x1 {
				x1[i] = 10 * rng.Float64()
				x2[i] = x1[i] + 6e-8*rng.NormFloat64()
				y[i] = 1 + 2*x1[i] - x2[i] + 0.1*rng.NormFloat64()
			}
			return map[string][]float64{"x1": x1, "x2": x2, "y": y}
		},
		condLo: 5e7, condHi: 2e8,
	},
	{
		name: "uncentred cubic", terms: polyTerms(3),
		cols:   polyCols(30, 1000, 1010, []float64{3, 0.5, -2, 1}, 0.05),
		condLo: 1e6, condHi: 1e7,
	},
	{
		name: "uncentred quartic", terms: polyTerms(4),
		cols:   polyCols(30, 1000, 1010, []float64{3, 0.5, -2, 1, 4}, 0.05),
		condLo: 1e9, condHi: 1e10,
	},
	{
		name: "collinear pair at the route threshold", terms: []string{"x1", "x2"},
		cols: func(rng *rand.Rand) map[string][]float64 {
			n := 40
			x1, x2, y := make([]float64, n), make([]float64, n), make([]float64, n)
			for i := range x1 {
				x1[i] = 10 * rng.Float64()
				x2[i] = x1[i] + 9e-4*rng.NormFloat64()
				y[i] = 1 + 2*x1[i] - x2[i] + 0.1*rng.NormFloat64()
			}
			return map[string][]float64{"x1": x1, "x2": x2, "y": y}
		},
		condLo: 3e3, condHi: 1e4,
	},
	{
		name: "uncentred quadratic", terms: polyTerms(2),
		cols:   polyCols(30, 1000, 1010, []float64{3, 0.5, -2}, 0.05),
		condLo: 1e2, condHi: 1e4,
	},
	{
		name: "uncentred quadratic, binary64 route", terms: polyTerms(2),
		cols:   polyCols(30, 2500, 2510, []float64{3, 0.5, -2}, 0.05),
		condLo: 1e3, condHi: 1e4,
	},
	{
		name: "uncentred cubic, binary64 route", terms: polyTerms(3),
		cols:   polyCols(30, 50, 60, []float64{3, 0.5, -2, 1}, 0.05),
		condLo: 3e3, condHi: 1e4,
	},
	{
		name: "uncentred quadratic far out", terms: polyTerms(2),
		cols:   polyCols(30, 1e5, 1e5+10, []float64{3, 0.5, -2}, 0.05),
		condLo: 1e4, condHi: 1e6,
	},
	{
		name: "collinear pair, huge offsets", terms: []string{"x1", "x2"},
		cols: func(rng *rand.Rand) map[string][]float64 {
			n := 40
			x1, x2, y := make([]float64, n), make([]float64, n), make([]float64, n)
			for i := range x1 {
				x1[i] = 1e6 + 10*rng.Float64()
				x2[i] = x1[i] + 6e-8*rng.NormFloat64()
				y[i] = 1e9 + 2*x1[i] - x2[i] + 0.1*rng.NormFloat64()
			}
			return map[string][]float64{"x1": x1, "x2": x2, "y": y}
		},
		condLo: 5e7, condHi: 5e8,
	},
	{
		name: "uncentred degree 10", terms: polyTerms(10),
		cols:   polyCols(24, 3, 9, []float64{2, -1, 3, 0.5, -4, 1, 2, -0.5, 1, 0.2, -0.1}, 0.01),
		condLo: 1e9, condHi: 1e10,
	},
}

// TestExactOracleIllConditioned: on the ill-conditioned cases every field
// of the fit and of the table agrees with the exact rational oracle to
// 1e-9 relative: coefficients, standard errors, t, p, confidence limits,
// RSS, sigma, R², F, (X'X)^-1, and per row the residual, fitted value,
// leverage, studentized residuals, Cook's distance, DFFITS, COVRATIO,
// DFBETAS and both outlier p-values, plus Leverage and Predict at new
// rows. The oracle's design is exact: x^3 is the exact cube of the
// double x (the model's term), not its rounding to double. The p-values
// are compared with the engine's tail function at the exact statistic,
// so they check the statistic's accuracy as it reaches the p-value.
func TestExactOracleIllConditioned(t *testing.T) {
	const tol = 1e-9
	for k, tc := range illCases {
		t.Run(tc.name, func(t *testing.T) {
			rng := rand.New(rand.NewPCG(uint64(40+k), 17))
			cols := tc.cols(rng)
			m, err := NewModel("y", tc.terms, true)
			if err != nil {
				t.Fatal(err)
			}
			X, y, err := m.Design(cols)
			if err != nil {
				t.Fatal(err)
			}
			f, err := Refit(m, X, y)
			if err != nil {
				t.Fatal(err)
			}
			if f.Condition < tc.condLo || f.Condition > tc.condHi {
				t.Fatalf("scaled condition number %.3g outside [%.0e, %.0e]: the case does not test what it says", f.Condition, tc.condLo, tc.condHi)
			}
			inf := Diagnose(f)
			ex := exactInfluenceRat(exactDesign(t, m, cols), floatsRat(y))
			n, p := f.N, f.P
			df := float64(n - p)
			worst, worstName := 0.0, ""
			cmp := func(name string, got, want float64) {
				t.Helper()
				e := relErr(got, want)
				if e > worst {
					worst, worstName = e, name
				}
				if e > tol {
					t.Errorf("%s = %.17g, exact %.17g (rel %.1e)", name, got, want, e)
				}
			}
			tq := -TQuantile(0.025, df)
			for j, c := range f.Coef {
				cmp(fmt.Sprintf("b%d", j), c.Estimate, ex.b[j])
				cmp(fmt.Sprintf("se%d", j), c.StdError, ex.se[j])
				tv := ex.b[j] / ex.se[j]
				cmp(fmt.Sprintf("t%d", j), c.T, tv)
				cmp(fmt.Sprintf("p%d", j), c.P, TTail2(tv, df))
				lo, hi := confLimits(ex.b[j], ex.se[j], tq)
				cmp(fmt.Sprintf("lower95_%d", j), c.Lower95, lo)
				cmp(fmt.Sprintf("upper95_%d", j), c.Upper95, hi)
			}
			cmp("RSS", f.RSS, ex.rss)
			cmp("sigma", f.Sigma, math.Sqrt(ex.rss/df))
			cmp("R2", f.RSquared, 1-ex.rss/ex.tss)
			fs := ((ex.tss - ex.rss) / float64(p-1)) / (ex.rss / df)
			cmp("F", f.FStat, fs)
			cmp("F p", f.FP, FSurvival(fs, float64(p-1), df))
			C := f.Unscaled()
			for i := 0; i < p; i++ {
				for j := 0; j < p; j++ {
					cmp(fmt.Sprintf("C[%d,%d]", i, j), C.At(i, j), ex.c[i][j])
				}
			}
			for i, o := range inf.Rows {
				w := ex.obs[i]
				cmp(fmt.Sprintf("row %d residual", i), o.Residual, w.e)
				cmp(fmt.Sprintf("row %d fitted", i), f.Fitted[i], y[i]-w.e)
				cmp(fmt.Sprintf("row %d h", i), o.Leverage, w.h)
				cmp(fmt.Sprintf("row %d r", i), o.StudentInternal, w.r)
				cmp(fmt.Sprintf("row %d t", i), o.StudentExternal, w.t)
				cmp(fmt.Sprintf("row %d cook", i), o.Cook, w.cook)
				cmp(fmt.Sprintf("row %d dffits", i), o.DFFITS, w.dffits)
				cmp(fmt.Sprintf("row %d covratio", i), o.COVRATIO, w.covratio)
				for j, v := range inf.DFBETASRow(i) {
					cmp(fmt.Sprintf("row %d dfbetas[%d]", i, j), v, w.dfbetas[j])
				}
				pv := TTail2(w.t, df-1)
				cmp(fmt.Sprintf("row %d outlier p", i), o.OutlierP, pv)
				cmp(fmt.Sprintf("row %d Bonferroni p", i), o.BonferroniP, math.Min(1, float64(n)*pv))
				cmp(fmt.Sprintf("row %d Leverage()", i), f.Leverage(X.RawRowView(i)), w.h)
			}
			// New rows, built as a caller builds them (DesignRow): the
			// middle of the data and a point beyond it.
			for _, at := range newRows(cols, tc.terms) {
				x0 := make([]float64, p)
				if err := m.DesignRow(x0, func(c string) float64 { return at[c] }); err != nil {
					t.Fatal(err)
				}
				h0, y0 := exactAt(t, m, at, ex)
				yhat, se := f.Predict(x0)
				cmp(fmt.Sprintf("Leverage(%v)", at), f.Leverage(x0), h0)
				cmp(fmt.Sprintf("Predict(%v)", at), yhat, y0)
				cmp(fmt.Sprintf("Predict(%v) se", at), se, math.Sqrt(ex.rss/df*h0))
			}
			t.Logf("scaled condition %.3g: worst field %s, rel %.1e", f.Condition, worstName, worst)
		})
	}
}

// confLimits returns b ∓ tq·se evaluated in 300-bit arithmetic.
func confLimits(b, se, tq float64) (lo, hi float64) {
	bf := new(big.Float).SetPrec(bigPrec).SetFloat64(b)
	d := new(big.Float).SetPrec(bigPrec).SetFloat64(se)
	d.Mul(d, new(big.Float).SetPrec(bigPrec).SetFloat64(tq))
	lo, _ = new(big.Float).SetPrec(bigPrec).Sub(bf, d).Float64()
	hi, _ = new(big.Float).SetPrec(bigPrec).Add(bf, d).Float64()
	return lo, hi
}

// newRows returns two rows of column values for the case: the mean of
// each column and the maximum plus a tenth of the range.
func newRows(cols map[string][]float64, terms []string) []map[string]float64 {
	mid, out := map[string]float64{}, map[string]float64{}
	for name, v := range cols {
		lo, hi, s := math.Inf(1), math.Inf(-1), 0.0
		for _, x := range v {
			lo, hi, s = math.Min(lo, x), math.Max(hi, x), s+x
		}
		mid[name] = s / float64(len(v))
		out[name] = hi + (hi-lo)/10
	}
	return []map[string]float64{mid, out}
}

// exactAt returns the exact leverage x0'(X'X)^-1 x0 and fitted mean x0'b
// of the model at the column values at (its exact design row), from the
// oracle's exact (X'X)^-1 and b.
func exactAt(tb testing.TB, m Model, at map[string]float64, ex exactFit) (h, yhat float64) {
	cols := map[string][]float64{m.Response: {0}}
	for k, v := range at {
		cols[k] = []float64{v}
	}
	x := exactDesign(tb, m, cols)[0]
	hr, yr, t := new(big.Rat), new(big.Rat), new(big.Rat)
	for j := range x {
		cx := new(big.Rat)
		for k := range x {
			cx.Add(cx, t.Mul(ex.cr[j][k], x[k]))
		}
		hr.Add(hr, t.Mul(x[j], cx))
		yr.Add(yr, t.Mul(x[j], ex.br[j]))
	}
	h, _ = hr.Float64()
	yhat, _ = yr.Float64()
	return h, yhat
}
