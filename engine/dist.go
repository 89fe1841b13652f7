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
	if df >= largeDF {
		if p, ok := tTail2Large(t2, df); ok {
			return p
		}
	}
	// RegIncBeta evaluates I_x directly when x < a/(a+b) (here |t| > 1),
	// so the tail keeps its relative accuracy; never form 1 - I.
	x := df / (df + t2)
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

// largeDF is the smallest df for which tTail2Large is used.
const largeDF = 1000

// sqrtHalfCoef are the Taylor coefficients of sqrt(s/(1-exp(-s))) about
// s = 0 (exact rationals, computed by series inversion and square root).
var sqrtHalfCoef = [...]float64{
	1, 1.0 / 4, 1.0 / 96, -1.0 / 384, -1.0 / 10240, 19.0 / 368640,
	79.0 / 61931520, -55.0 / 49545216, -2339.0 / 118908518400,
	11813.0 / 475634073600, 677.0 / 1993133260800, -2117.0 / 3720515420160,
	-308963.0 / 48753634065776640, 64604977.0 / 4875363406577664000,
}

// tTail2Large evaluates I_x(a, 1/2), a = df/2, x = df/(df+t²), for large
// df by an expansion in incomplete gamma functions. With u = exp(-s),
//
//	I_x(a, 1/2) = 1/B(a,1/2) ∫_{s0}^∞ e^{-a s} (1-e^{-s})^{-1/2} ds,  s0 = log(1+t²/df),
//
// and (1-e^{-s})^{-1/2} = s^{-1/2} Σ c_k s^k (sqrtHalfCoef), so
//
//	I = Γ(a+1/2)/(Γ(a)√a) · Σ c_k a^{-k} Γ(k+1/2, a s0)/√π.
//
// Γ(1/2, X)/√π = erfc(√X) and Γ(k+3/2, X) = (k+1/2)Γ(k+1/2, X) + X^{k+1/2}e^{-X};
// every term is then positive or rapidly decreasing, so the sum keeps
// full relative accuracy in the far tail. Γ(a+1/2)/(Γ(a)√a) uses its
// asymptotic series (error below 1e-21 for a >= 500). ok is false outside
// the range where the expansion is known to be accurate (s0 > 1/2, or an
// argument that underflows).
func tTail2Large(t2, df float64) (p float64, ok bool) {
	return newTTail(df).large(t2)
}

// tTail evaluates TTail2 for one df, with the df-dependent constants of
// the large-df expansion computed once.
type tTail struct {
	df, a, ia, ratio float64
}

func newTTail(df float64) tTail {
	a := df / 2
	ia := 1 / a
	return tTail{df: df, a: a, ia: ia,
		ratio: 1 + ia*(-1.0/8+ia*(1.0/128+ia*(5.0/1024+ia*(-21.0/32768+ia*(-399.0/262144+ia*869.0/4194304)))))}
}

// p2 returns TTail2(t, df).
func (tt tTail) p2(t float64) float64 {
	if tt.df >= largeDF && t-t == 0 {
		t2 := t * t
		if t2 == 0 {
			return 1
		}
		if p, ok := tt.large(t2); ok {
			return p
		}
	}
	return TTail2(t, tt.df)
}

func (tt tTail) large(t2 float64) (p float64, ok bool) {
	u := t2 / tt.df
	var s0 float64
	if u < 1e-4 {
		// log1p by its series: the first omitted term is below 2e-17
		// relative.
		s0 = u * (1 - u*(1.0/2-u*(1.0/3-u*(1.0/4-u/5))))
	} else {
		s0 = math.Log1p(u)
	}
	X := tt.a * s0
	if s0 > 0.5 || X > 700 {
		return 0, false
	}
	ia := tt.ia
	rx := math.Sqrt(X)
	g := math.Erfc(rx)
	pw := rx * math.Exp(-X) / math.SqrtPi // X^{k+1/2} e^{-X}/√π
	sum := g
	ak := 1.0
	for k := 1; k < len(sqrtHalfCoef); k++ {
		g = (float64(k)-0.5)*g + pw
		pw *= X
		ak *= ia
		term := sqrtHalfCoef[k] * ak * g
		sum += term
		if math.Abs(term) < 1e-18*sum {
			break
		}
	}
	return tt.ratio * sum, true
}
