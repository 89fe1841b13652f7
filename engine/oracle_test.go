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
	n, p := X.Dims()
	xr := newRatMat(n, p)
	yr := make([]*big.Rat, n)
	for i := 0; i < n; i++ {
		for j := 0; j < p; j++ {
			xr[i][j].SetFloat64(X.At(i, j))
		}
		yr[i] = new(big.Rat).SetFloat64(y[i])
	}
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
		// COVRATIO = (s_(i)^2/s^2)^p/(1-h)
		cr := new(big.Rat).Quo(s2i, s2)
		pw := big.NewRat(1, 1)
		for k := 0; k < p; k++ {
			pw.Mul(pw, cr)
		}
		pw.Quo(pw, om)
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
	b = make([]float64, p)
	for j := range b {
		b[j], _ = br[j].Float64()
	}
	rss, _ = rssR.Float64()
	return b, rss, obs
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
// refined fit equals the exact least-squares solution of the double
// design it was given, computed in rational arithmetic, to 13 digits. The
// remaining distance to the certified values (TestNIST) is then the
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
	b := exactLS(X, y)
	for j := range b {
		if l := lre(f.Coef[j].Estimate, b[j]); l < 13 {
			t.Errorf("b%d agrees with the exact solution to %.1f digits, want >= 13", j, l)
		}
	}
}

// exactLS solves the normal equations of X, y exactly.
func exactLS(X *mat.Dense, y []float64) []float64 {
	n, p := X.Dims()
	A := newRatMat(p, p)
	rhs := make([]*big.Rat, p)
	for j := range rhs {
		rhs[j] = new(big.Rat)
	}
	t, u := new(big.Rat), new(big.Rat)
	for i := 0; i < n; i++ {
		for j := 0; j < p; j++ {
			u.SetFloat64(X.At(i, j))
			for k := 0; k < p; k++ {
				t.SetFloat64(X.At(i, k))
				A[j][k].Add(A[j][k], t.Mul(t, u))
			}
			t.SetFloat64(y[i])
			rhs[j].Add(rhs[j], t.Mul(t, u))
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
