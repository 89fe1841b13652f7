package engine

import "math"

// Double-double helpers: a value is hi + lo with |lo| <= ulp(hi)/2, giving
// about 32 significant digits. Used for residuals and sums during iterative
// refinement.

// twoSum returns s, e with s = fl(a+b) and s+e = a+b exactly.
func twoSum(a, b float64) (s, e float64) {
	s = a + b
	bb := s - a
	e = (a - (s - bb)) + (b - bb)
	return
}

// twoSumQuick is twoSum for |a| >= |b|.
func twoSumQuick(a, b float64) (s, e float64) {
	s = a + b
	e = b - (s - a)
	return
}

// dd is a double-double accumulator.
type dd struct{ hi, lo float64 }

// add adds a double.
func (d dd) add(a float64) dd {
	s, e := twoSum(d.hi, a)
	e += d.lo
	s, e = twoSumQuick(s, e)
	return dd{s, e}
}

// addProd adds a*b (exact product).
func (d dd) addProd(a, b float64) dd {
	p := a * b
	pe := math.FMA(a, b, -p)
	s, e := twoSum(d.hi, p)
	e += d.lo + pe
	s, e = twoSumQuick(s, e)
	return dd{s, e}
}

// addDD adds another double-double.
func (d dd) addDD(o dd) dd {
	s, e := twoSum(d.hi, o.hi)
	e += d.lo + o.lo
	s, e = twoSumQuick(s, e)
	return dd{s, e}
}

// mulDD returns d*o.
func (d dd) mulDD(o dd) dd {
	p := d.hi * o.hi
	pe := math.FMA(d.hi, o.hi, -p)
	pe += d.hi*o.lo + d.lo*o.hi
	s, e := twoSumQuick(p, pe)
	return dd{s, e}
}

// divDD returns d/o (double-double accuracy).
func (d dd) divDD(o dd) dd {
	q1 := d.hi / o.hi
	r := d.addDD(o.mulDD(dd{-q1, 0}))
	q2 := r.hi / o.hi
	s, e := twoSumQuick(q1, q2)
	return dd{s, e}
}

func (d dd) neg() dd { return dd{-d.hi, -d.lo} }

// float returns the double nearest to d.
func (d dd) float() float64 { return d.hi + d.lo }

// mulF returns d*x for a double x.
func (d dd) mulF(x float64) dd {
	p := d.hi * x
	pe := math.FMA(d.hi, x, -p) + d.lo*x
	s, e := twoSumQuick(p, pe)
	return dd{s, e}
}

// sub returns d-o.
func (d dd) sub(o dd) dd { return d.addDD(o.neg()) }

// sqrt returns √d for d >= 0 (one Newton step on the double root).
func (d dd) sqrt() dd {
	if d.hi <= 0 {
		return dd{math.Sqrt(d.hi), 0}
	}
	s := math.Sqrt(d.hi)
	// √d ≈ s + (d - s²)/(2s), with s² exact.
	sq := dd{s, 0}.mulF(s)
	r := d.sub(sq)
	c := r.hi / (2 * s)
	hi, lo := twoSumQuick(s, c)
	return dd{hi, lo}
}

// recip returns 1/x in double-double.
func recip(x float64) dd { return dd{1, 0}.divDD(dd{x, 0}) }
