package engine

import (
	"math"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"
)

// Tail probabilities are taken from the regularized incomplete beta
// function I_x(a, b) (mathext.RegIncBeta), which keeps full relative
// accuracy far into the tails, where 1 - CDF would round to zero.

// TTail2 returns the two-sided tail probability P(|T| >= |t|) of Student's
// t with df degrees of freedom:
//
//	P = I_{df/(df+t^2)}(df/2, 1/2)
//
// It is exact in relative terms also for P far below 1e-16. NaN when t is
// NaN or df <= 0.
func TTail2(t, df float64) float64 {
	if math.IsNaN(t) || math.IsNaN(df) || df <= 0 {
		return math.NaN()
	}
	if math.IsInf(t, 0) {
		return 0
	}
	t2 := t * t
	if t2 == 0 {
		return 1
	}
	// x = df/(df+t^2) loses nothing for large t; for small t the
	// complement y = t^2/(df+t^2) is the accurate argument.
	x := df / (df + t2)
	y := t2 / (df + t2)
	if x > 0.5 {
		return 1 - mathext.RegIncBeta(0.5, df/2, y)
	}
	return mathext.RegIncBeta(df/2, 0.5, x)
}

// FSurvival returns P(F >= f) for the F distribution with d1 and d2
// degrees of freedom:
//
//	P = I_{d2/(d2+d1 f)}(d2/2, d1/2)
//
// with full relative accuracy in the upper tail.
func FSurvival(f, d1, d2 float64) float64 {
	if math.IsNaN(f) || d1 <= 0 || d2 <= 0 {
		return math.NaN()
	}
	if f <= 0 {
		return 1
	}
	if math.IsInf(f, 1) {
		return 0
	}
	x := d2 / (d2 + d1*f)
	y := d1 * f / (d2 + d1*f)
	if x > 0.5 {
		return 1 - mathext.RegIncBeta(d1/2, d2/2, y)
	}
	return mathext.RegIncBeta(d2/2, d1/2, x)
}

// TQuantile returns the p quantile of Student's t with df degrees of
// freedom.
func TQuantile(p, df float64) float64 {
	if df <= 0 || math.IsNaN(p) {
		return math.NaN()
	}
	// Sigma must be 1: the zero value silently gives wrong answers.
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}.Quantile(p)
}

// FQuantile returns the p quantile of the F distribution with d1 and d2
// degrees of freedom.
func FQuantile(p, d1, d2 float64) float64 {
	if d1 <= 0 || d2 <= 0 || math.IsNaN(p) {
		return math.NaN()
	}
	return distuv.F{D1: d1, D2: d2}.Quantile(p)
}
