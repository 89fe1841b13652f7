package engine

import (
	"fmt"
	"math"
	"strings"
)

// RootStatus says how a reading meets the calibration curve f on the
// calibrated range. Its text is meant for output.
type RootStatus string

const (
	// RootUnique: f(x) = y0 at exactly one x of the range.
	RootUnique RootStatus = "unique"
	// RootSeveral: f(x) = y0 at more than one x of the range (the curve is
	// not monotone there); Inverse.Roots lists them.
	RootSeveral RootStatus = "several"
	// RootBelow: y0 is below every value f takes on the range.
	RootBelow RootStatus = "below-range"
	// RootAbove: y0 is above every value f takes on the range.
	RootAbove RootStatus = "above-range"
)

// SetShape is the shape of the inversion set within the calibrated
// range. Its text is meant for output.
type SetShape string

const (
	// ShapeBounded: one interval with both ends inside the range.
	ShapeBounded SetShape = "bounded"
	// ShapeOpenLow: one interval that reaches the low end of the range;
	// the data do not bound x from below there.
	ShapeOpenLow SetShape = "open-low"
	// ShapeOpenHigh: one interval that reaches the high end of the range.
	ShapeOpenHigh SetShape = "open-high"
	// ShapeWholeRange: every x of the range is consistent with the
	// reading.
	ShapeWholeRange SetShape = "whole-range"
	// ShapeSplit: two or more disjoint intervals.
	ShapeSplit SetShape = "split"
	// ShapeEmpty: no x of the range is consistent with the reading.
	ShapeEmpty SetShape = "empty"
)

// Inverse is the answer of an inverse prediction (see the package
// documentation, "Inverse prediction", for the formulas).
type Inverse struct {
	Reading  float64  // y0, the mean of Readings new readings
	Column   string   // the predictor column solved for
	Range    Interval // the calibrated range searched
	Level    float64
	Readings int
	Weight   float64
	DF       int
	T        float64 // t(1-(1-Level)/2; DF)

	// Status says whether f(x) = y0 has one, several or no solution in
	// Range; Roots lists the solutions in ascending order.
	Status RootStatus
	Roots  []float64
	// Estimate is x̂ when Status is RootUnique, else NaN. Slope is f'(x̂)
	// and StandardUncertainty u = s·√(1/(m·w0) + h(x̂))/|f'(x̂)|; both NaN
	// without a unique estimate (u is +Inf when the slope is 0).
	Estimate            float64
	Slope               float64
	StandardUncertainty float64

	// Parts is the inversion set {x in Range : y0 lies in the prediction
	// interval for the mean of m readings at x} as disjoint closed
	// intervals in ascending order, clipped to Range. Shape names its
	// shape. Interval is that set when it is one interval; a bound where
	// the set reaches the end of Range (ReachesLow, ReachesHigh) is NaN,
	// not the range end, since the data do not determine it there. When
	// the set is split or empty, both bounds are NaN.
	Parts       []Interval
	Shape       SetShape
	Interval    Interval
	ReachesLow  bool
	ReachesHigh bool
}

// Note describes the answer in plain words when it is not a single
// solution with a bounded interval, and returns "" when it is.
func (inv Inverse) Note() string {
	var s []string
	switch inv.Status {
	case RootBelow:
		s = append(s, fmt.Sprintf("the reading is below the calibration curve over the whole calibrated range %g to %g; there is no estimate", inv.Range.Lo, inv.Range.Hi))
	case RootAbove:
		s = append(s, fmt.Sprintf("the reading is above the calibration curve over the whole calibrated range %g to %g; there is no estimate", inv.Range.Lo, inv.Range.Hi))
	case RootSeveral:
		s = append(s, fmt.Sprintf("the curve takes the reading's value at %d points of the calibrated range (it is not monotone there); there is no single estimate", len(inv.Roots)))
	}
	switch inv.Shape {
	case ShapeOpenLow:
		s = append(s, fmt.Sprintf("the interval reaches the low end of the calibrated range (%g); its lower limit is not determined by the data", inv.Range.Lo))
	case ShapeOpenHigh:
		s = append(s, fmt.Sprintf("the interval reaches the high end of the calibrated range (%g); its upper limit is not determined by the data", inv.Range.Hi))
	case ShapeWholeRange:
		s = append(s, "every value of the calibrated range is consistent with the reading; the calibration does not bound it")
	case ShapeSplit:
		s = append(s, fmt.Sprintf("the values consistent with the reading form %d separate intervals, not one", len(inv.Parts)))
	case ShapeEmpty:
		s = append(s, "no value of the calibrated range is consistent with the reading at this level")
	}
	return strings.Join(s, "; ")
}

// Calibration inverts a fit that is a line or a polynomial in one
// predictor column. It is safe for concurrent use.
type Calibration struct {
	fit    *Fit
	column string
	pow    []int // power of the column in each design column (0: intercept)
	deg    int
	rng    Interval
}

// NewCalibration prepares inverse predictions from f. column names the
// predictor column ("" for the model's only column). rng is the
// calibrated range searched; the zero Interval means the range of the
// column in the fit's data (taken from the design column of the column's
// first power; a model without that term needs rng).
//
// Errors: ErrNotPolynomial when the model uses more than one column, a
// log, or has no term in the column; a *DataError wrapping
// ErrNotPredictor when column is not the model's column; ErrBadOption for
// a range that is not finite and increasing, or that cannot be taken
// from the data.
func NewCalibration(f *Fit, column string, rng Interval) (*Calibration, error) {
	m := f.Model
	cols := m.Columns()
	if len(cols) != 1 {
		return nil, fmt.Errorf("%w: the model uses %d predictor columns (%s)", ErrNotPolynomial, len(cols), strings.Join(cols, ", "))
	}
	if column != "" && column != cols[0] {
		return nil, &DataError{Row: -1, Column: column, Err: ErrNotPredictor}
	}
	c := &Calibration{fit: f, column: cols[0], pow: make([]int, f.P)}
	off := 0
	if m.Intercept {
		off = 1
	}
	first := -1
	for k, t := range m.Terms {
		p := 0
		for _, fc := range t.Factors {
			if fc.Log {
				return nil, fmt.Errorf("%w: term %q takes a log", ErrNotPolynomial, t.Text)
			}
			p += fc.Power
		}
		c.pow[off+k] = p
		c.deg = max(c.deg, p)
		if p == 1 {
			first = off + k
		}
	}
	if rng == (Interval{}) {
		if first < 0 {
			return nil, fmt.Errorf("%w: the model has no term %q, so the calibrated range must be given", ErrBadOption, c.column)
		}
		raw := f.X().RawMatrix()
		lo, hi := math.Inf(1), math.Inf(-1)
		for i := 0; i < f.N; i++ {
			v := raw.Data[i*raw.Stride+first]
			lo, hi = math.Min(lo, v), math.Max(hi, v)
		}
		rng = Interval{lo, hi}
	}
	if !(rng.Lo < rng.Hi) || math.IsInf(rng.Lo, 0) || math.IsInf(rng.Hi, 0) {
		return nil, fmt.Errorf("%w: calibrated range [%v, %v] is not a finite increasing interval", ErrBadOption, rng.Lo, rng.Hi)
	}
	c.rng = rng
	return c, nil
}

// Range returns the calibrated range.
func (c *Calibration) Range() Interval { return c.rng }

// Column returns the predictor column.
func (c *Calibration) Column() string { return c.column }

// Invert returns the inverse prediction of y0, the mean of o.Readings new
// readings. It fails only with ErrBadOption (bad options, non-finite y0).
func (c *Calibration) Invert(y0 float64, o IntervalOptions) (Inverse, error) {
	f := c.fit
	r, err := o.resolve(f.DF)
	if err != nil {
		return Inverse{}, err
	}
	if math.IsNaN(y0) || math.IsInf(y0, 0) {
		return Inverse{}, fmt.Errorf("%w: reading %v is not a finite number", ErrBadOption, y0)
	}
	w := invWork{c: c, row: make([]float64, f.P), y0: y0, v: r.newVar()}
	w.k = r.t * r.t * f.Sigma * f.Sigma
	inv := Inverse{
		Reading: y0, Column: c.column, Range: c.rng,
		Level: r.level, Readings: r.m, Weight: r.w0, DF: f.DF, T: r.t,
		Estimate: math.NaN(), Slope: math.NaN(), StandardUncertainty: math.NaN(),
		Interval: Interval{math.NaN(), math.NaN()},
	}

	// The estimate: roots of e(x) = f(x) - y0, a polynomial of degree deg.
	inv.Roots = c.roots(w.e, c.deg)
	switch len(inv.Roots) {
	case 0:
		if w.e(c.rng.Lo) > 0 {
			inv.Status = RootBelow
		} else {
			inv.Status = RootAbove
		}
	case 1:
		inv.Status = RootUnique
		x := inv.Roots[0]
		inv.Estimate = x
		inv.Slope = c.slope(x)
		h := w.lev(x)
		inv.StandardUncertainty = f.Sigma * math.Sqrt(w.v+h) / math.Abs(inv.Slope)
	default:
		inv.Status = RootSeveral
	}

	// The inversion set: where g(x) = e(x)² - t²s²(1/(m w0) + h(x)) <= 0,
	// g a polynomial of degree 2 deg.
	if w.k == 0 {
		// An exact fit: the set is the roots themselves.
		for _, x := range inv.Roots {
			inv.Parts = append(inv.Parts, Interval{x, x})
		}
	} else {
		pts := append([]float64{c.rng.Lo}, c.roots(w.g, 2*c.deg)...)
		pts = append(pts, c.rng.Hi)
		for i := 0; i+1 < len(pts); i++ {
			a, b := pts[i], pts[i+1]
			if !(a < b) {
				continue
			}
			if !(w.g(a+(b-a)/2) <= 0) {
				continue
			}
			if n := len(inv.Parts); n > 0 && inv.Parts[n-1].Hi == a {
				inv.Parts[n-1].Hi = b
			} else {
				inv.Parts = append(inv.Parts, Interval{a, b})
			}
		}
	}
	n := len(inv.Parts)
	if n > 0 {
		inv.ReachesLow = inv.Parts[0].Lo == c.rng.Lo
		inv.ReachesHigh = inv.Parts[n-1].Hi == c.rng.Hi
	}
	switch {
	case n == 0:
		inv.Shape = ShapeEmpty
	case n > 1:
		inv.Shape = ShapeSplit
	default:
		inv.Interval = inv.Parts[0]
		switch {
		case inv.ReachesLow && inv.ReachesHigh:
			inv.Shape = ShapeWholeRange
		case inv.ReachesLow:
			inv.Shape = ShapeOpenLow
		case inv.ReachesHigh:
			inv.Shape = ShapeOpenHigh
		default:
			inv.Shape = ShapeBounded
		}
		if inv.ReachesLow {
			inv.Interval.Lo = math.NaN()
		}
		if inv.ReachesHigh {
			inv.Interval.Hi = math.NaN()
		}
	}
	return inv, nil
}

// Invert is NewCalibration(f, "", Interval{}) followed by Invert: the
// inverse prediction of y0 over the range of the fit's data. Finding that
// range reads every row; to invert many readings, keep one Calibration.
func (f *Fit) Invert(y0 float64, o IntervalOptions) (Inverse, error) {
	c, err := NewCalibration(f, "", Interval{})
	if err != nil {
		return Inverse{}, err
	}
	return c.Invert(y0, o)
}

// slope returns f'(x) = Σ_j k_j b_j x^(k_j - 1), accumulated in
// double-double.
func (c *Calibration) slope(x float64) float64 {
	var acc dd
	for j, k := range c.pow {
		if k == 0 {
			continue
		}
		xk := 1.0
		if k > 1 {
			xk = ipow(x, k-1)
		}
		acc = acc.addProd(float64(k)*c.fit.Coef[j].Estimate, xk)
	}
	return acc.float()
}

// invWork evaluates the two functions an inversion solves.
type invWork struct {
	c   *Calibration
	row []float64
	y0  float64
	v   float64 // 1/(m w0)
	k   float64 // t² s²
}

// setRow builds the design row at x through the model.
func (w *invWork) setRow(x float64) bool {
	return w.c.fit.Model.DesignRow(w.row, func(string) float64 { return x }) == nil
}

// e returns f(x) - y0, with f(x) = x'b accumulated in double-double.
func (w *invWork) e(x float64) float64 {
	if !w.setRow(x) {
		return math.NaN()
	}
	acc := dd{-w.y0, 0}
	for j, v := range w.row {
		acc = acc.addProd(v, w.c.fit.Coef[j].Estimate)
	}
	return acc.float()
}

// lev returns h(x) = x'(X'X)^-1 x.
func (w *invWork) lev(x float64) float64 {
	if !w.setRow(x) {
		return math.NaN()
	}
	return w.c.fit.Leverage(w.row)
}

// g returns e(x)² - t²s²(1/(m w0) + h(x)): not positive exactly where
// the prediction interval at x contains y0.
func (w *invWork) g(x float64) float64 {
	e := w.e(x)
	return e*e - w.k*(w.v+w.c.fit.Leverage(w.row))
}

// roots returns the roots in the calibrated range of fn, a polynomial of
// degree at most deg evaluated accurately, in ascending order.
//
// Isolation: fn is interpolated at deg+1 Chebyshev points of the range
// (exact for a polynomial of that degree, up to rounding); the critical
// points of the interpolant, found by recursion over its derivatives,
// split the range into pieces on which fn is monotone. Each piece whose
// ends differ in sign holds one root, found by Brent's bracketed search
// on fn itself until the bracket is at most 4·eps·|x| + eps·(Hi-Lo) wide,
// eps = 2^-52. A root where fn only touches zero without a sign change
// (a double root) is found only when fn is exactly 0 at a piece end.
func (c *Calibration) roots(fn func(float64) float64, deg int) []float64 {
	lo, hi := c.rng.Lo, c.rng.Hi
	mid, half := lo+(hi-lo)/2, (hi-lo)/2
	toX := func(u float64) float64 {
		if u <= -1 {
			return lo
		}
		if u >= 1 {
			return hi
		}
		return mid + half*u
	}
	pts := []float64{lo}
	if deg >= 2 {
		cheb := chebInterp(func(u float64) float64 { return fn(toX(u)) }, deg+1)
		for _, u := range chebRoots(chebDeriv(cheb)) {
			if x := toX(u); x > pts[len(pts)-1] && x < hi {
				pts = append(pts, x)
			}
		}
	}
	pts = append(pts, hi)
	var out []float64
	add := func(x float64) {
		if len(out) == 0 || x > out[len(out)-1] {
			out = append(out, x)
		}
	}
	tol := 0x1p-52 * (hi - lo)
	fa := fn(pts[0])
	for i := 0; i+1 < len(pts); i++ {
		a, b := pts[i], pts[i+1]
		fb := fn(b)
		switch {
		case fa == 0:
			add(a)
		case fb != 0 && (fa < 0) != (fb < 0):
			add(brent(fn, a, b, fa, fb, tol))
		}
		fa = fb
	}
	if fa == 0 {
		add(pts[len(pts)-1])
	}
	return out
}

// chebInterp returns the coefficients c_0..c_{n-1} of the Chebyshev
// series Σ c_k T_k(u) that interpolates fn at the n Chebyshev points
// u_j = cos(π(j+1/2)/n) of [-1, 1].
func chebInterp(fn func(float64) float64, n int) []float64 {
	vals := make([]float64, n)
	us := make([]float64, n)
	for j := range vals {
		us[j] = math.Cos(math.Pi * (float64(j) + 0.5) / float64(n))
		vals[j] = fn(us[j])
	}
	c := make([]float64, n)
	t0 := make([]float64, n) // T_{k-1}(u_j), T_k(u_j) by the recurrence
	t1 := make([]float64, n)
	for j := range t0 {
		t0[j], t1[j] = 1, us[j]
	}
	for k := 0; k < n; k++ {
		s := 0.0
		tk := t0
		if k > 0 {
			tk = t1
			if k > 1 {
				for j := range t0 {
					t0[j], t1[j] = t1[j], 2*us[j]*t1[j]-t0[j]
				}
			}
		}
		for j, v := range vals {
			s += v * tk[j]
		}
		c[k] = 2 * s / float64(n)
	}
	c[0] /= 2
	return c
}

// chebEval evaluates Σ c_k T_k(u) by Clenshaw's recurrence.
func chebEval(c []float64, u float64) float64 {
	var b1, b2 float64
	for k := len(c) - 1; k >= 1; k-- {
		b1, b2 = 2*u*b1-b2+c[k], b1
	}
	return u*b1 - b2 + c[0]
}

// chebDeriv returns the Chebyshev coefficients of the derivative.
func chebDeriv(c []float64) []float64 {
	n := len(c) - 1
	if n < 1 {
		return nil
	}
	d := make([]float64, n+2)
	for k := n; k >= 1; k-- {
		d[k-1] = d[k+1] + 2*float64(k)*c[k]
	}
	d[0] /= 2
	return d[:n]
}

// chebRoots returns the roots in [-1, 1] of Σ c_k T_k(u), ascending,
// found on the pieces between the roots of the derivative (recursively)
// by Newton steps safeguarded with bisection. Leading coefficients below
// 8 eps Σ|c_k| are dropped; they change the series by less than its
// rounding error on [-1, 1].
func chebRoots(c []float64) []float64 {
	sum := 0.0
	for _, v := range c {
		sum += math.Abs(v)
	}
	n := len(c) - 1
	for n > 0 && math.Abs(c[n]) <= 8*0x1p-52*sum {
		n--
	}
	c = c[:n+1]
	switch n {
	case 0:
		return nil
	case 1:
		if u := -c[0] / c[1]; u >= -1 && u <= 1 {
			return []float64{u}
		}
		return nil
	}
	d := chebDeriv(c)
	pts := append([]float64{-1}, chebRoots(d)...)
	pts = append(pts, 1)
	var out []float64
	add := func(u float64) {
		if len(out) == 0 || u > out[len(out)-1] {
			out = append(out, u)
		}
	}
	fa := chebEval(c, pts[0])
	for i := 0; i+1 < len(pts); i++ {
		a, b := pts[i], pts[i+1]
		fb := chebEval(c, b)
		switch {
		case fa == 0:
			add(a)
		case fb != 0 && (fa < 0) != (fb < 0):
			add(newtonBisect(c, d, a, b, fa))
		}
		fa = fb
	}
	if fa == 0 {
		add(1)
	}
	return out
}

// newtonBisect finds the root of the series c (derivative d) in [a, b],
// where c changes sign (fa = c(a)).
func newtonBisect(c, d []float64, a, b, fa float64) float64 {
	x := a + (b-a)/2
	for it := 0; it < 100; it++ {
		fx := chebEval(c, x)
		if fx == 0 {
			return x
		}
		if (fx < 0) == (fa < 0) {
			a, fa = x, fx
		} else {
			b = x
		}
		if b-a <= 0x1p-50 {
			return a + (b-a)/2
		}
		nx := x - fx/chebEval(d, x)
		if !(nx > a && nx < b) || math.Abs(nx-x) > (b-a)/2 {
			nx = a + (b-a)/2
		}
		if nx == x {
			return x
		}
		x = nx
	}
	return x
}

// brent returns a root of fn in [a, b], where fa = fn(a) and fb = fn(b)
// differ in sign, by Brent's method (Brent 1973, "zeroin"): inverse
// quadratic interpolation and secant steps, falling back to bisection,
// until the bracket is at most 4·eps·|x| + tol wide.
func brent(fn func(float64) float64, a, b, fa, fb, tol float64) float64 {
	const eps = 0x1p-52
	c, fc := a, fa
	d := b - a
	e := d
	for it := 0; it < 200; it++ {
		if (fb > 0) == (fc > 0) {
			c, fc = a, fa
			d = b - a
			e = d
		}
		if math.Abs(fc) < math.Abs(fb) {
			a, b, c = b, c, b
			fa, fb, fc = fb, fc, fb
		}
		tl := 2*eps*math.Abs(b) + tol/2
		m := (c - b) / 2
		if math.Abs(m) <= tl || fb == 0 {
			return b
		}
		if math.Abs(e) < tl || math.Abs(fa) <= math.Abs(fb) {
			d, e = m, m
		} else {
			var p, q float64
			s := fb / fa
			if a == c {
				p = 2 * m * s
				q = 1 - s
			} else {
				q = fa / fc
				r := fb / fc
				p = s * (2*m*q*(q-r) - (b-a)*(r-1))
				q = (q - 1) * (r - 1) * (s - 1)
			}
			if p > 0 {
				q = -q
			} else {
				p = -p
			}
			if 2*p < math.Min(3*m*q-math.Abs(tl*q), math.Abs(e*q)) {
				e = d
				d = p / q
			} else {
				d, e = m, m
			}
		}
		a, fa = b, fb
		if math.Abs(d) > tl {
			b += d
		} else if m > 0 {
			b += tl
		} else {
			b -= tl
		}
		fb = fn(b)
	}
	return b
}
