package engine

import "math"

// A table of the two-sided t tail for one large df, for the per-row
// outlier p-values of a large fit: every row shares the df, so the tail
// is tabulated once on |t| < tailTableEnd as piecewise polynomials and
// each row costs one polynomial evaluation instead of an incomplete gamma
// expansion (erfc, exp and a series). Rows beyond the table take the
// direct route (tTail.p2).
//
// Piece k is the Taylor polynomial of P(u) = P(|T| >= u) about the
// piece's midpoint u0: P(u0) comes from the direct route, and
// P'(u) = -2 f(u) with the t density f(u) = C (1+u²/ν)^-α, α = (ν+1)/2,
// C = Γ(a+1/2)/(Γ(a)√(2aπ)) = ratio/√(2π) (a = ν/2, ratio as in tTail).
// The Taylor coefficients a_k of g(u) = (1+u²/ν)^-α about u0 follow from
// (ν+u²) g' = -2αu g:
//
//	a_{k+1} = -[2u0(α+k) a_k + (2α+k-1) a_{k-1}] / ((ν+u0²)(k+1)).
//
// On pieces of width 1/16 the first omitted term is below 1e-18 of P, and
// the terms fall geometrically, so the sum is as accurate as P(u0) and
// f(u0); TestTailTable checks it against the direct route and against
// the mpmath reference values.
const (
	tailTableEnd = 4
	tailTablePer = 16 // pieces per unit of |t|
	tailTableDeg = 12 // degree in h = |t| - u0 (p2 is written for 12)
	tailTableLen = tailTableDeg + 1
	// tailTableRows: below this many rows the direct route is cheaper
	// than building the table (about 15 µs, the cost of 450 rows).
	tailTableRows = 1 << 11
)

type tailTable struct {
	coef []float64 // piece k's coefficients at [k*tailTableLen:], lowest order first
	tt   tTail
}

// newTailTable tabulates TTail2(·, tt.df) on [0, tailTableEnd); tt.df
// must be at least largeDF (the table relies on tt.ratio).
func newTailTable(tt tTail) *tailTable {
	const pieces = tailTableEnd * tailTablePer
	nu := tt.df
	alpha := (nu + 1) / 2
	c := tt.ratio / math.Sqrt(2*math.Pi)
	tb := &tailTable{coef: make([]float64, pieces*tailTableLen), tt: tt}
	var a [tailTableLen]float64
	for k := 0; k < pieces; k++ {
		u0 := (float64(k) + 0.5) / tailTablePer
		d := nu + u0*u0
		a[0] = math.Exp(-alpha * math.Log1p(u0*u0/nu))
		prev := 0.0
		for j := 0; j+1 < tailTableDeg; j++ {
			next := -(2*u0*(alpha+float64(j))*a[j] + (2*alpha+float64(j)-1)*prev) / (d * float64(j+1))
			prev = a[j]
			a[j+1] = next
		}
		co := tb.coef[k*tailTableLen : (k+1)*tailTableLen]
		co[0] = tt.p2(u0)
		// P(u0+h) = P(u0) - 2C Σ a_j h^{j+1}/(j+1).
		for j := 0; j < tailTableDeg; j++ {
			co[j+1] = -2 * c * a[j] / float64(j+1)
		}
	}
	return tb
}

// p2 returns TTail2(t, df).
func (tb *tailTable) p2(t float64) float64 {
	u := math.Abs(t)
	if !(u < tailTableEnd) {
		return tb.tt.p2(t)
	}
	k := int(u * tailTablePer)
	h := u - (float64(k)+0.5)/tailTablePer
	c := tb.coef[k*tailTableLen : (k+1)*tailTableLen : (k+1)*tailTableLen]
	// Estrin's scheme: the degree-12 polynomial as pairs in h, combined
	// in h², h⁴ and h⁸, five dependent steps instead of twelve.
	h2 := h * h
	h4 := h2 * h2
	h8 := h4 * h4
	p01 := math.FMA(c[1], h, c[0])
	p23 := math.FMA(c[3], h, c[2])
	p45 := math.FMA(c[5], h, c[4])
	p67 := math.FMA(c[7], h, c[6])
	p89 := math.FMA(c[9], h, c[8])
	pab := math.FMA(c[11], h, c[10])
	p03 := math.FMA(p23, h2, p01)
	p47 := math.FMA(p67, h2, p45)
	p8b := math.FMA(pab, h2, p89)
	p07 := math.FMA(p47, h4, p03)
	p8c := math.FMA(c[12], h4, p8b)
	return math.FMA(p8c, h8, p07)
}
