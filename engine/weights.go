package engine

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"gonum.org/v1/gonum/mat"
)

// Weighted least squares.
//
// A weighted fit minimises Σ w_i (y_i - x_i'b)² with w_i > 0: the
// ordinary fit of the rows √w_i [x_i y_i], computed in the same QR pass
// (each row multiplied by √w_i as it is copied into its chunk) and refined
// on X'W(y - Xb). Its diagnostics are those of the scaled rows:
//
//	leverage          h_i = w_i x_i'(X'WX)^-1 x_i        (Σ h_i = p)
//	weighted residual ẽ_i = √w_i e_i,  e_i = y_i - x_i'b
//	s²                = Σ w_i e_i² / (n - p)
//
// and every measure of the package documentation with ẽ_i in place of e_i
// (R's lm(weights = ) with influence.measures computes the same). Scaling
// every weight by one constant changes no influence measure; it scales
// RSS, TSS and Sigma² by that constant.

// ErrWeight: a weight is zero, negative or not finite. The error is a
// *DataError naming the row and the weight column.
var ErrWeight = errors.New("engine: weight must be a positive finite number")

// RefitWeighted fits y = Xb + e by weighted least squares with the row
// weights w (len n, every w_i > 0 and finite). w == nil is Refit. The
// method and the errors are those of Refit, plus a *DataError wrapping
// ErrWeight (Column "weight") for a bad weight; the Fit keeps w in
// Weights, RSS = Σ w e², TSS = Σ w (y - ȳ_w)² with ȳ_w = Σ w y / Σ w
// (Σ w y² without an intercept), Sigma² = RSS/(n-p), and R², the F test
// and the VIFs from these weighted sums, as R's summary.lm reports for
// lm(weights = ). Residuals and Fitted are on the scale of y (unweighted).
//
// Weighted fits take the routes of Refit by the scaled condition number
// of √W X: the binary64 route up to 1e4, the extended route above it (R
// again in double-double with the rows √w_i x_i formed in double-double,
// the refinement on X'W(y - Xb) in double-double), refusal above 1e10.
// Their design is taken as given: a derived term (x^3 when x is a term
// too) keeps its rounded value in X, since the weighted rows are not
// products of the model's terms.
func RefitWeighted(m Model, X *mat.Dense, y, w []float64) (*Fit, error) {
	if w == nil {
		return Refit(m, X, y)
	}
	n, _ := X.Dims()
	if len(w) != n {
		panic(fmt.Sprintf("engine: RefitWeighted: X has %d rows, w has %d values", n, len(w)))
	}
	col := m.Weight.Column
	if col == "" {
		col = "weight"
	}
	if err := checkWeights(w, col); err != nil {
		return nil, err
	}
	if c, ok := equalWeights(w); ok {
		f, err := Refit(m, X, y)
		if err != nil {
			return nil, err
		}
		f.weighEqually(w, c)
		return f, nil
	}
	return refit(m, X, y, w)
}

// equalWeights reports whether every weight equals w[0].
func equalWeights(w []float64) (float64, bool) {
	for _, v := range w {
		if v != w[0] {
			return 0, false
		}
	}
	return w[0], len(w) > 0
}

// weighEqually turns the unweighted fit f into the fit with every weight
// c: the same least-squares problem, so the estimates, standard errors,
// R², the F test and every influence measure are unchanged, while RSS,
// TSS and Sigma² scale by c and the factors of X'X become those of
// X'WX = c X'X (R by √c, R^-1 and M by 1/√c). With c = 1 nothing moves.
func (f *Fit) weighEqually(w []float64, c float64) {
	f.Weights = w
	f.sw = sqrtWeights(w)
	if c == 1 {
		return
	}
	s := math.Sqrt(c)
	for i := range f.r {
		f.r[i] *= s
		f.ri[i] /= s
		f.m[i] /= s
	}
	if e := f.ext; e != nil {
		// The extended route's factors likewise, in double-double.
		sd := dd{s, 0}
		for i := range e.r {
			e.r[i] = e.r[i].mulF(s)
			e.ri[i] = e.ri[i].divDD(sd)
			e.ris[i] = e.ris[i].divDD(sd)
			e.m[i] = e.m[i].divDD(sd)
		}
	}
	f.rss = f.rss.mulDD(dd{c, 0})
	f.RSS = f.rss.float()
	f.TSS *= c
	f.Sigma *= s
}

// checkWeights returns a *DataError wrapping ErrWeight for the first
// weight that is not positive and finite.
func checkWeights(w []float64, col string) error {
	for i, v := range w {
		if !(v > 0) || math.IsInf(v, 0) {
			return &DataError{Row: i, Column: col, Err: ErrWeight}
		}
	}
	return nil
}

// sqrtWeights returns √w_i for every weight.
func sqrtWeights(w []float64) []float64 {
	s := make([]float64, len(w))
	for i, v := range w {
		s[i] = math.Sqrt(v)
	}
	return s
}

// sumDD returns Σ v in double-double, rounded once.
func sumDD(v []float64) float64 {
	var s dd
	for _, x := range v {
		s = s.add(x)
	}
	return s.float()
}

// WeightedResiduals returns √w_i e_i for each row of a weighted fit, and
// Residuals itself for an unweighted one (do not modify it).
func (f *Fit) WeightedResiduals() []float64 {
	if f.sw == nil {
		return f.Residuals
	}
	out := make([]float64, f.N)
	for i, e := range f.Residuals {
		out[i] = f.sw[i] * e
	}
	return out
}

// Weighting says where a model's row weights come from. The zero value is
// unweighted.
//
//	Column "w",   Power 0: w_i = w (a column of weights)
//	Column "x",   Power k: w_i = 1/x^k, the variance growing as x^k
//
// ParseWeighting reads the notation of our own:
//
//	weighting = name                       a column of weights
//	          | "inverse" "(" name [ "^" power ] ")"   power 1..maxPower
//
// so "w", "inverse(conc)" (w = 1/conc) and "inverse(conc^2)"
// (w = 1/conc²); names follow the term grammar (quoted when needed).
//
// Model.Build computes the weights and Design.Fit fits with them; Refit
// itself ignores Model.Weight (RefitWeighted takes the weights).
type Weighting struct {
	Column string
	Power  int
}

// Weighted reports whether w names a source of weights.
func (w Weighting) Weighted() bool { return w.Column != "" }

// String writes w in the notation ParseWeighting reads.
func (w Weighting) String() string {
	if w.Column == "" {
		return ""
	}
	name := quoteName(w.Column)
	switch w.Power {
	case 0:
		return name
	case 1:
		return "inverse(" + name + ")"
	}
	return "inverse(" + name + "^" + strconv.Itoa(w.Power) + ")"
}

// ParseWeighting parses a weighting (grammar at Weighting). The empty
// string is unweighted. Failures are *TermError.
func ParseWeighting(s string) (Weighting, error) {
	if strings.TrimSpace(s) == "" {
		return Weighting{}, nil
	}
	p := termParser{src: s}
	p.skip()
	name, quoted, err := p.name()
	if err != nil {
		return Weighting{}, err
	}
	w := Weighting{Column: name}
	p.skip()
	if !quoted && name == "inverse" && p.pos < len(s) && s[p.pos] == '(' {
		p.pos++
		p.skip()
		if p.pos == len(s) {
			return Weighting{}, p.fail(p.pos, "expected a column name inside inverse()")
		}
		inner, _, err := p.name()
		if err != nil {
			return Weighting{}, err
		}
		w = Weighting{Column: inner, Power: 1}
		p.skip()
		if p.pos < len(s) && s[p.pos] == '^' {
			p.pos++
			p.skip()
			k, err := p.power()
			if err != nil {
				return Weighting{}, err
			}
			w.Power = k
			p.skip()
		}
		if p.pos == len(s) || s[p.pos] != ')' {
			return Weighting{}, p.fail(p.pos, "expected \")\" to close inverse(")
		}
		p.pos++
		p.skip()
	}
	if p.pos != len(s) {
		return Weighting{}, p.fail(p.pos, "expected the end of the weighting")
	}
	return w, nil
}

// rowWeights computes the weights of the rows from the numeric columns:
// a *DataError wrapping ErrMissingColumn or ErrWeight (also for a NaN)
// (Column the weighting's column) when they cannot be had.
func (w Weighting) rowWeights(cols map[string][]float64, n int) ([]float64, error) {
	if !w.Weighted() {
		return nil, nil
	}
	v, ok := cols[w.Column]
	if !ok {
		return nil, &DataError{Row: -1, Column: w.Column, Err: ErrMissingColumn}
	}
	if len(v) != n {
		panic(fmt.Sprintf("engine: weight column %q has %d values, response has %d", w.Column, len(v), n))
	}
	out := make([]float64, n)
	for i, x := range v {
		wi := x
		if w.Power > 0 {
			wi = 1 / ipow(x, w.Power)
		}
		if !(wi > 0) || math.IsInf(wi, 0) {
			return nil, &DataError{Row: i, Column: w.Column, Err: ErrWeight}
		}
		out[i] = wi
	}
	return out, nil
}

// RowWeight returns the weight of one row from its column values (as
// DesignRow takes them): a *DataError with Row -1 as for the design.
// An unweighted model gives 1.
func (w Weighting) RowWeight(value func(col string) float64) (float64, error) {
	if !w.Weighted() {
		return 1, nil
	}
	out, err := w.rowWeights(map[string][]float64{w.Column: {value(w.Column)}}, 1)
	if err != nil {
		var de *DataError
		if errors.As(err, &de) {
			de.Row = -1
		}
		return 0, err
	}
	return out[0], nil
}

// quoteName writes a column name as the term grammar reads it: bare when
// it is an identifier, quoted otherwise.
func quoteName(s string) string {
	p := termParser{src: s}
	if s != "" {
		if name, quoted, err := p.name(); err == nil && !quoted && name == s && p.pos == len(s) {
			return s
		}
	}
	return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
}

// weightedColumn is the weighted form of one column of a chunk in the QR
// pass: col = √w (x - c) pre, and the checks' values (NaN test, Σ w (x -
// c), whether a value differs from the first).
func weightedColumn(col, x []float64, stride int, wt, sw []float64, cj, pj, fj float64) (bad, sum float64, diff bool) {
	for ii := range col {
		v0 := x[ii*stride]
		bad += v0 * 0
		diff = diff || v0 != fj
		d0 := v0 - cj
		sum += wt[ii] * d0
		col[ii] = d0 * pj * sw[ii]
	}
	return bad, sum, diff
}

// weightedResponse is the weighted form of the response column of a
// chunk in the QR pass (rows from lo).
func weightedResponse(st *chunkStat, col, y, wt, sw []float64, cen, pre float64, p, lo int) {
	for ii, v := range y {
		if v-v != 0 {
			if st.badRow < 0 {
				st.badRow, st.badCol = lo+ii, p
			}
		} else {
			st.min[p] = math.Min(st.min[p], v)
			st.max[p] = math.Max(st.max[p], v)
		}
		st.sum[p] += wt[ii] * (v - cen)
		col[ii] = v * pre * sw[ii]
	}
}

// weightedFinal is the final pass of a weighted fit over one chunk:
// e = y - x'(b + bl) (compensated; bl the low parts of the refined
// coefficients, nil to use b alone), the fitted values,
// RSS = Σ w e² in double-double and the sums Σ w d, Σ w d² of
// d = y - ȳ_w (y without an intercept) for TSS.
func weightedFinal(x []float64, stride, p int, y, wt, b, bl, res, fitted []float64, intercept bool, ybar float64) (rss dd, t1, t2 float64) {
	var rs, rc float64
	for i := range y {
		row := x[i*stride : i*stride+p]
		var e float64
		if bl == nil {
			e = residual2(y[i], 0, row, b)
		} else {
			s, c := residualExt(y[i], row, nil, 0, b, bl)
			e = s + c
		}
		res[i] = e
		fitted[i] = y[i] - e
		wi := wt[i]
		q := e * e
		qe := math.FMA(e, e, -q)
		wq := wi * q
		wqe := math.FMA(wi, q, -wq) + wi*qe
		var se float64
		rs, se = twoSum(rs, wq)
		rc += se + wqe
		d := y[i]
		if intercept {
			d -= ybar
		}
		t1 += wi * d
		t2 += wi * d * d
	}
	return dd{rs, 0}.add(rc), t1, t2
}
