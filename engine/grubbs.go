package engine

import "math"

// GrubbsResult is the outcome of Grubbs' test for a single outlier.
type GrubbsResult struct {
	N        int     // sample size
	Mean, SD float64 // sample mean and standard deviation (n-1)
	G        float64 // max |x_i - mean| / SD
	Index    int     // index of the value attaining G (-1 when undefined)
	Critical float64 // two-sided critical value at alpha
	Outlier  bool    // G > Critical
}

// Grubbs runs the two-sided Grubbs test for one outlier on x at level
// alpha: G = max|x_i - x̄|/s, rejected when G exceeds
// GrubbsCritical(n, alpha, true). The test assumes the other values are a
// normal sample. With n < 3 or s = 0 the result has G NaN and no outlier.
func Grubbs(x []float64, alpha float64) GrubbsResult {
	n := len(x)
	res := GrubbsResult{N: n, Index: -1, G: math.NaN(), Mean: math.NaN(), SD: math.NaN()}
	if n < 3 {
		res.Critical = math.NaN()
		return res
	}
	var sum dd
	for _, v := range x {
		sum = sum.add(v)
	}
	mean := sum.divDD(dd{float64(n), 0})
	var ss dd
	for _, v := range x {
		d := dd{v, 0}.addDD(mean.neg()).float()
		ss = ss.addProd(d, d)
	}
	sd := math.Sqrt(ss.float() / float64(n-1))
	res.Mean, res.SD = mean.float(), sd
	res.Critical = GrubbsCritical(n, alpha, true)
	if sd == 0 || math.IsNaN(sd) {
		return res
	}
	best := -1.0
	for i, v := range x {
		d := math.Abs(dd{v, 0}.addDD(mean.neg()).float())
		if d > best {
			best, res.Index = d, i
		}
	}
	res.G = best / sd
	res.Outlier = res.G > res.Critical
	return res
}

// GrubbsCritical returns Grubbs' critical value for n values at level
// alpha (NIST/SEMATECH e-Handbook §1.3.5.17.1):
//
//	G_crit = (n-1)/√n · √(t²/(n-2+t²)),  t = t(1-α/(2n), n-2) two-sided,
//	                                     t = t(1-α/n, n-2) one-sided.
//
// NaN for n < 3.
func GrubbsCritical(n int, alpha float64, twoSided bool) float64 {
	if n < 3 || !(alpha > 0 && alpha < 1) {
		return math.NaN()
	}
	fn := float64(n)
	a := alpha / fn
	if twoSided {
		a /= 2
	}
	t := -TQuantile(a, fn-2)
	t2 := t * t
	return (fn - 1) / math.Sqrt(fn) * math.Sqrt(t2/(fn-2+t2))
}
