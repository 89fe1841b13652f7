package engine

// Fragility of a fit: the fewest observations whose removal changes a
// conclusion that users of the fit rely on.
//
// # Conclusions
//
// A Conclusions value lists what is relied on. Unless it is switched off,
// that is the sign of each non-intercept coefficient and whether it is
// significant at Alpha (two-sided t test). A coefficient that a removal
// takes to zero (within 1e-9 of its full-data standard error, that is to
// rounding) has lost its sign; one that is zero with all rows has no sign
// to lose, and its sign is not a conclusion. A band or checkpoint breaks
// when the change exceeds its width by more than 1e-9 relative (a change
// equal to the width, to rounding, does not count). A model may add bands (a
// coefficient must stay within K standard errors of its full-data value)
// and checkpoints (the prediction at a named point must stay within a
// tolerance, in the response's units).
//
// # Removing rows without refitting
//
// For a set S of m rows with design rows X_S, residuals e_S, C = (X'X)^-1
// and H_SS = X_S C X_S' (m x m), the fit without S is, exactly,
//
//	b_(S)     = b - C X_S' (I - H_SS)^-1 e_S
//	RSS_(S)   = RSS - e_S' (I - H_SS)^-1 e_S
//	C_(S)     = C + C X_S' (I - H_SS)^-1 X_S C          (Woodbury)
//	s²_(S)    = RSS_(S) / (n - m - p)
//
// so each subset costs O(m p² + m³) after C x_i is known, not a refit.
// A subset whose removal leaves X_(S) singular (I - H_SS has a pivot below
// 1e-8 in its Cholesky factor, that is det(X_(S)'X_(S))/det(X'X) =
// det(I - H_SS) is numerically zero), leaves n - m <= p rows, or leaves a
// response that Refit refuses (constant with an intercept, or zero in
// every row) is skipped: the reduced fit does not exist, so it cannot
// state a conclusion. Skipped subsets are counted in
// FragilityResult.Skipped. (Refit also refuses a design whose scaled
// condition number exceeds 1e10; the downdate does not test that.)
//
// # Search
//
// Sizes m = 1, 2, ..., MaxRemoved are tried in turn and the first size
// with a breaking subset is the index. For each size the search is
// exhaustive when the number of subsets C(n, m) fits in what is left of
// Budget (a count of subsets, so that results do not depend on the
// machine); otherwise it runs over all m-subsets of the Candidates rows
// ranked most influential (round robin over the rankings by Cook's
// distance, leverage, |DFBETAS| of each coefficient and |external
// studentized residual|), shrinking the candidate list until C(L, m) fits
// the budget. FragilityResult.Searched says which was done. Within a
// size, subsets are visited in lexicographic order of their (0-based)
// rows and the first breaking one is reported; when it breaks several
// conclusions, the first in the order signs, significance, bands,
// checkpoints (coefficients in model order) is reported.

import (
	"errors"
	"fmt"
	"gonum.org/v1/gonum/mat"
	"math"
	"sort"
	"strconv"
	"strings"
)

// ErrConclusion marks a Conclusions value that does not fit the model: an
// unknown term, a checkpoint without a column the model needs, a
// non-positive K or tolerance, or Alpha outside (0, 1). The error is a
// *ConclusionError.
var ErrConclusion = errors.New("engine: invalid conclusion")

// ConclusionError reports an invalid conclusion. Conclusion names it (as
// in FragilityResult.Conclusion, as far as it can be built); it wraps
// ErrConclusion, and Err, when set, gives the underlying cause (such as a
// *DataError from building a checkpoint's design row).
type ConclusionError struct {
	Conclusion string
	Msg        string
	Err        error
}

func (e *ConclusionError) Error() string {
	s := fmt.Sprintf("engine: conclusion %q: %s", e.Conclusion, e.Msg)
	if e.Err != nil {
		s += ": " + e.Err.Error()
	}
	return s
}

// Unwrap returns ErrConclusion and the cause.
func (e *ConclusionError) Unwrap() []error {
	if e.Err != nil {
		return []error{ErrConclusion, e.Err}
	}
	return []error{ErrConclusion}
}

// Conclusions lists what users of a fit rely on. The zero value means the
// defaults: the sign and the significance at 0.05 of every non-intercept
// coefficient (as DefaultConclusions).
type Conclusions struct {
	// Alpha is the level of the two-sided t test of significance;
	// 0 means 0.05.
	Alpha float64
	// Signs and Significance switch on the sign and significance
	// conclusions for the coefficients named in Terms (all non-intercept
	// coefficients when Terms is empty). When both are false and there
	// are no bands or checkpoints, the defaults apply.
	Signs, Significance bool
	// Terms restricts Signs and Significance to these coefficient names
	// (Term.Text, or "intercept").
	Terms []string
	// Coefficients are bands: the coefficient must stay within K
	// full-data standard errors of its full-data estimate.
	Coefficients []CoefBand
	// Checkpoints are predictions that must stay within Tolerance of
	// their full-data value.
	Checkpoints []Checkpoint
}

// CoefBand requires coefficient Term to stay within K standard errors
// (of the full-data fit) of its full-data estimate.
type CoefBand struct {
	Term string
	K    float64
}

// Checkpoint requires the prediction at At (predictor column values; every
// column of the model must be given) to stay within Tolerance, in the
// response's units, of its full-data value. Name, when set, is used in
// messages instead of the list of values.
type Checkpoint struct {
	Name      string
	At        map[string]float64
	Tolerance float64
}

// DefaultConclusions returns the sign and the significance at 0.05 of
// every non-intercept coefficient.
func DefaultConclusions() Conclusions {
	return Conclusions{Alpha: 0.05, Signs: true, Significance: true}
}

// FragilityOptions tunes Fragility. Zero fields take the defaults.
type FragilityOptions struct {
	// MaxRemoved is the largest number of rows removed together
	// (default 3).
	MaxRemoved int
	// Limit: the fit is fragile when its index is at most Limit
	// (default 2).
	Limit int
	// Budget is the most subsets evaluated over all sizes
	// (default 5,000,000).
	Budget int
	// Candidates is the length of the ranked list of rows searched when
	// a size cannot be searched exhaustively (default 50).
	Candidates int
}

// Defaults of FragilityOptions.
const (
	DefaultMaxRemoved = 3
	DefaultLimit      = 2
	DefaultBudget     = 5_000_000
	DefaultCandidates = 50
)

func (o FragilityOptions) withDefaults() FragilityOptions {
	if o.MaxRemoved <= 0 {
		o.MaxRemoved = DefaultMaxRemoved
	}
	if o.Limit <= 0 {
		o.Limit = DefaultLimit
	}
	if o.Budget <= 0 {
		o.Budget = DefaultBudget
	}
	if o.Candidates <= 0 {
		o.Candidates = DefaultCandidates
	}
	return o
}

// SearchStep records how one size of removal set was searched.
type SearchStep struct {
	Removed    int // m, the size of the removed sets
	Candidates int // rows the sets were drawn from (N when exhaustive)
	Exhaustive bool
	Subsets    int // subsets evaluated (skipped ones included)
}

// FragilityResult is the outcome of Fragility.
type FragilityResult struct {
	// Index is the smallest number of rows whose removal breaks a
	// conclusion, or 0 when none was found up to MaxRemoved.
	Index int
	// Searched is "exhaustive" when every size tried was searched
	// exhaustively, "top L candidates" when none was, and e.g.
	// "exhaustive for 1-2 removed, top 50 candidates for 3" otherwise.
	Searched string
	// Steps details the search of each size tried.
	Steps []SearchStep
	// RemovedRows are the removed rows, 1-based data rows, ascending.
	RemovedRows []int
	// Conclusion names what broke: "sign of x", "significance of x at
	// 0.05", "x within 2 SE" or "prediction at x=48.2 within 0.5".
	Conclusion string
	// Kind is "sign", "significance", "band" or "checkpoint"; Term is the
	// coefficient concerned (empty for a checkpoint).
	Kind, Term string
	// Before and After are the coefficient (sign, band), the p-value
	// (significance) or the prediction (checkpoint) with all rows and
	// with RemovedRows left out.
	Before, After float64
	// Fragile is Index > 0 && Index <= Limit.
	Fragile bool
	// MaxRemoved and Limit are the options in force.
	MaxRemoved, Limit int
	// Evaluated counts the subsets evaluated, Skipped those whose
	// removal left no fit (singular design or too few rows).
	Evaluated, Skipped int
}

// Fragility returns the fragility index of f under conclusions c: the
// smallest m (1 <= m <= opt.MaxRemoved) such that removing some m rows
// breaks a conclusion. Removal is computed as a rank-m downdate of the fit
// (see the file documentation), never by refitting. inf ranks rows for
// the non-exhaustive search; when nil it is computed with Diagnose.
// Errors are *ConclusionError (wrapping ErrConclusion).
func Fragility(f *Fit, inf *Influence, c Conclusions, opt FragilityOptions) (FragilityResult, error) {
	opt = opt.withDefaults()
	checks, err := fgCompile(f, c)
	if err != nil {
		return FragilityResult{}, err
	}
	s := fgBaseSearch(f, opt.MaxRemoved)
	var ranked []int
	if fgNeedsRanking(f.N, opt) {
		if inf == nil {
			inf = Diagnose(f)
		}
		ranked = fgRankRows(inf, s.b, opt.Candidates)
	}
	return s.searchRanked(checks, ranked, opt), nil
}

// fgNeedsRanking reports whether some size cannot be searched exhaustively.
func fgNeedsRanking(n int, opt FragilityOptions) bool {
	left := opt.Budget
	for m := 1; m <= opt.MaxRemoved; m++ {
		k := fgBinom(n, m)
		if k > float64(left) {
			return true
		}
		left -= int(k)
	}
	return false
}

// fragKind enumerates conclusion kinds in reporting order.
type fragKind int

const (
	fgKindSign fragKind = iota
	fgKindSig
	fgKindBand
	fgKindCheckpoint
)

var fragKindNames = [...]string{"sign", "significance", "band", "checkpoint"}

// fragCheck is one conclusion, compiled into absolute terms against the
// full-data fit.
type fragCheck struct {
	kind  fragKind
	j     int       // coefficient index (sign, significance, band)
	term  string    // coefficient name
	text  string    // as reported
	half  float64   // band half-width K*SE, or checkpoint tolerance
	x0    []float64 // checkpoint design row
	alpha float64
}

// fgCompile validates c against f and lists the checks.
func fgCompile(f *Fit, c Conclusions) ([]fragCheck, error) {
	alpha := c.Alpha
	if alpha == 0 {
		alpha = 0.05
	}
	if !(alpha > 0 && alpha < 1) {
		return nil, &ConclusionError{Conclusion: "significance", Msg: fmt.Sprintf("alpha %v is not in (0, 1)", c.Alpha)}
	}
	if !c.Signs && !c.Significance && len(c.Coefficients) == 0 && len(c.Checkpoints) == 0 {
		c.Signs, c.Significance = true, true
	}
	names := f.Model.Names()
	index := func(term string) int {
		for j, nm := range names {
			if nm == term {
				return j
			}
		}
		return -1
	}
	var sel []int
	if len(c.Terms) > 0 {
		for _, t := range c.Terms {
			j := index(t)
			if j < 0 {
				return nil, &ConclusionError{Conclusion: "sign of " + t, Msg: "the model has no such term"}
			}
			sel = append(sel, j)
		}
		sort.Ints(sel)
	} else {
		for j := range names {
			if f.Model.Intercept && j == 0 {
				continue
			}
			sel = append(sel, j)
		}
	}
	var out []fragCheck
	if c.Signs {
		for _, j := range sel {
			zero := fgZeroSE * f.Coef[j].StdError
			if math.Abs(f.Coef[j].Estimate) <= zero {
				continue // zero with all rows: no sign to lose
			}
			out = append(out, fragCheck{kind: fgKindSign, j: j, term: names[j], text: "sign of " + names[j], half: zero})
		}
	}
	if c.Significance {
		for _, j := range sel {
			out = append(out, fragCheck{kind: fgKindSig, j: j, term: names[j], alpha: alpha,
				text: "significance of " + names[j] + " at " + fgNum(alpha)})
		}
	}
	for _, b := range c.Coefficients {
		text := b.Term + " within " + fgNum(b.K) + " SE"
		j := index(b.Term)
		if j < 0 {
			return nil, &ConclusionError{Conclusion: text, Msg: "the model has no such term"}
		}
		if !(b.K > 0) || math.IsInf(b.K, 0) {
			return nil, &ConclusionError{Conclusion: text, Msg: "K must be positive and finite"}
		}
		out = append(out, fragCheck{kind: fgKindBand, j: j, term: names[j], text: text, half: b.K * f.Coef[j].StdError})
	}
	cols := f.Model.Columns()
	for _, cp := range c.Checkpoints {
		label := cp.Name
		if label == "" {
			parts := make([]string, 0, len(cols))
			for _, col := range cols {
				if v, ok := cp.At[col]; ok {
					parts = append(parts, col+"="+fgNum(v))
				}
			}
			label = strings.Join(parts, ", ")
		}
		text := "prediction at " + label + " within " + fgNum(cp.Tolerance)
		if !(cp.Tolerance > 0) || math.IsInf(cp.Tolerance, 0) {
			return nil, &ConclusionError{Conclusion: text, Msg: "tolerance must be positive and finite"}
		}
		for _, col := range cols {
			if _, ok := cp.At[col]; !ok {
				return nil, &ConclusionError{Conclusion: text, Msg: fmt.Sprintf("no value for column %q", col)}
			}
		}
		x0 := make([]float64, f.P)
		if err := f.Model.DesignRow(x0, func(col string) float64 { return cp.At[col] }); err != nil {
			return nil, &ConclusionError{Conclusion: text, Msg: "cannot build its design row", Err: err}
		}
		out = append(out, fragCheck{kind: fgKindCheckpoint, j: -1, text: text, half: cp.Tolerance, x0: x0})
	}
	return out, nil
}

// fgZeroSE: a coefficient within fgZeroSE full-data standard errors of
// zero after a removal is zero to working precision, and has lost its
// sign.
const fgZeroSE = 1e-9

// fgTie: a band or checkpoint is broken when the change exceeds its
// width by more than this relative amount, so that a change equal to the
// width (to rounding) does not count.
const fgTie = 1e-9

// fgNum formats a user-given number in its shortest exact form.
func fgNum(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// fragSearch holds a fit in the form the downdate needs. It may describe
// the recorded fit or the fit after hypothetical readings were added on
// the fitted surface (see Suggest): removable rows are always the
// recorded rows 0..n-1.
type fragSearch struct {
	n, p int
	rows func(i int) []float64 // design row i
	e    []float64             // residuals of the recorded rows
	c    []float64             // (X'X)^-1, p x p row-major
	b    []float64             // coefficients
	rss  float64
	df   int // residual degrees of freedom with nothing removed

	// Baseline the conclusions are held to (the recorded fit's values).
	base *Fit

	// traps are sets of rows (0-based, ascending) whose removal, with any
	// other rows, leaves a response that Refit refuses: constant (with an
	// intercept) or zero in every row; trapY is the value left.
	traps [][]int
	trapY []float64
}

// fgTraps finds the sets of at most maxM rows whose removal leaves the
// response constant (with an intercept) or all zero. With n > 2 maxM
// only a value held by more than half of the rows can be left, found by
// a majority vote in O(n).
func fgTraps(y []float64, intercept bool, maxM int) ([][]int, []float64) {
	n := len(y)
	var cands []float64
	if n <= 2*maxM+1 {
		seen := map[float64]bool{}
		for _, v := range y {
			if !seen[v] {
				seen[v] = true
				cands = append(cands, v)
			}
		}
	} else {
		var cand float64
		count := 0
		for _, v := range y {
			switch {
			case count == 0:
				cand, count = v, 1
			case v == cand:
				count++
			default:
				count--
			}
		}
		cands = []float64{cand}
	}
	var traps [][]int
	var vals []float64
	for _, v := range cands {
		if !intercept && v != 0 {
			continue
		}
		var rows []int
		for i, yi := range y {
			if yi != v {
				rows = append(rows, i)
				if len(rows) > maxM {
					break
				}
			}
		}
		if len(rows) <= maxM {
			traps = append(traps, rows)
			vals = append(vals, v)
		}
	}
	return traps, vals
}

func fgBaseSearch(f *Fit, maxM int) *fragSearch {
	X := f.X()
	p := f.P
	c := make([]float64, p*p)
	C := f.Unscaled()
	for j := 0; j < p; j++ {
		for k := 0; k < p; k++ {
			c[j*p+k] = C.At(j, k)
		}
	}
	b := make([]float64, p)
	for j := range b {
		b[j] = f.Coef[j].Estimate
	}
	rows := X.RawRowView
	if f.sw != nil {
		// A weighted fit is the ordinary fit of the rows √w_i x_i with
		// residuals √w_i e_i (weights.go); every removal formula holds on
		// them as they are.
		xs := mat.NewDense(f.N, p, nil)
		for i := 0; i < f.N; i++ {
			f.scaledRow(xs.RawRowView(i), i)
		}
		rows = xs.RawRowView
	}
	fs := &fragSearch{
		n: f.N, p: p,
		rows: rows,
		e:    f.WeightedResiduals(),
		c:    c, b: b, rss: f.RSS, df: f.N - p,
		base: f,
	}
	fs.traps, fs.trapY = fgTraps(f.Y(), f.Model.Intercept, maxM)
	return fs
}

// fragEval evaluates removal sets against compiled checks. It owns its
// scratch space; one evaluator per goroutine.
type fragEval struct {
	s      *fragSearch
	checks []fragCheck
	m      int

	// per-check constants
	center []float64 // full-data value (coefficient or prediction)
	before []float64 // reported value with nothing removed
	sig    []bool    // significance baseline
	tcrit  float64   // t critical value at df - m
	g      [][]float64

	// row data for the rows in play: u[i] = C x_i, keyed by position
	// in the pool.
	pool []int
	x    [][]float64 // design rows
	u    [][]float64
	h    []float64
	inv  [3]float64 // M^-1 for m = 1 (inv[0]) and m = 2 (00, 01, 11)
	ubuf []float64

	// scratch
	mm, l []float64 // m x m
	w, es []float64 // m
	db    []float64 // p
	cs    []float64 // m
	v     []float64 // m
}

func (s *fragSearch) newEvaluator(checks []fragCheck) *fragEval {
	ev := &fragEval{s: s, checks: checks}
	p := s.p
	ev.center = make([]float64, len(checks))
	ev.sig = make([]bool, len(checks))
	ev.before = make([]float64, len(checks))
	ev.g = make([][]float64, len(checks))
	for k, ch := range checks {
		switch ch.kind {
		case fgKindSign, fgKindBand:
			ev.center[k] = s.base.Coef[ch.j].Estimate
			ev.before[k] = ev.center[k]
		case fgKindSig:
			ev.center[k] = s.base.Coef[ch.j].Estimate
			se := math.Sqrt(s.rss / float64(s.df) * s.c[ch.j*p+ch.j])
			ev.before[k] = TTail2(s.b[ch.j]/se, float64(s.df))
			ev.sig[k] = ev.before[k] < ch.alpha
		case fgKindCheckpoint:
			ev.center[k] = fgDot(ch.x0, fgCoefs(s.base))
			ev.before[k] = ev.center[k]
		}
	}
	return ev
}

// load makes pool (0-based rows) the rows in play, computing C x_i, h_i
// and the checkpoint gains x0'C x_i; it reuses the evaluator's memory.
func (ev *fragEval) load(pool []int) {
	s, p, n := ev.s, ev.s.p, len(pool)
	ev.pool = pool
	if cap(ev.h) < n {
		ev.u = make([][]float64, n)
		ev.x = make([][]float64, n)
		ev.h = make([]float64, n)
		ev.ubuf = make([]float64, n*p)
	}
	ev.u, ev.x, ev.h = ev.u[:n], ev.x[:n], ev.h[:n]
	for k, ch := range ev.checks {
		if ch.kind == fgKindCheckpoint {
			if cap(ev.g[k]) < n {
				ev.g[k] = make([]float64, n)
			}
			ev.g[k] = ev.g[k][:n]
		}
	}
	for a, i := range pool {
		u := ev.ubuf[a*p : (a+1)*p : (a+1)*p]
		ev.u[a] = u
		x := s.rows(i)
		ev.x[a] = x
		fgMatVec(u, s.c, x, p)
		ev.h[a] = fgDot(x, u)
		for k, ch := range ev.checks {
			if ch.kind == fgKindCheckpoint {
				ev.g[k][a] = fgDot(ch.x0, u)
			}
		}
	}
}

// fgCoefs returns the estimates of f.
func fgCoefs(f *Fit) []float64 {
	b := make([]float64, len(f.Coef))
	for j := range b {
		b[j] = f.Coef[j].Estimate
	}
	return b
}

// setSize prepares for removal sets of size m.
func (ev *fragEval) setSize(m int) {
	ev.m = m
	ev.mm = make([]float64, m*m)
	ev.l = make([]float64, m*m)
	ev.w = make([]float64, m)
	ev.es = make([]float64, m)
	ev.v = make([]float64, m)
	ev.db = make([]float64, ev.s.p)
	ev.cs = make([]float64, m)
	ev.tcrit = math.NaN()
	for _, ch := range ev.checks {
		if ch.kind == fgKindSig {
			if df := ev.s.df - m; df > 0 {
				ev.tcrit = TQuantile(1-ch.alpha/2, float64(df))
			}
			break
		}
	}
}

// fgSingularPivot is the smallest Cholesky pivot of I - H_SS accepted (see
// the file documentation).
const fgSingularPivot = 1e-8

// outcome of one subset.
const (
	fgHolds = iota
	fgBreaks
	fgSkipped
)

// eval evaluates removing the pool positions set (length ev.m). On a
// break it returns the index of the first broken check and its value
// after removal.
func (ev *fragEval) eval(set []int) (int, int, float64) {
	s, m, p := ev.s, ev.m, ev.s.p
	if s.df-m <= 0 || ev.trapped(set) {
		return fgSkipped, -1, 0
	}
	var rss float64
	switch m {
	case 1:
		// M = 1 - h.
		a := set[0]
		d := 1 - ev.h[a]
		if !(d > fgSingularPivot) {
			return fgSkipped, -1, 0
		}
		e := s.e[ev.pool[a]]
		ev.w[0] = e / d
		rss = s.rss - e*ev.w[0]
		ev.inv[0] = 1 / d
	case 2:
		// M = [1-h_a, -q; -q, 1-h_b], q = x_a'C x_b; the Cholesky pivots
		// are 1-h_a and det/(1-h_a).
		a, b := set[0], set[1]
		maa, mbb := 1-ev.h[a], 1-ev.h[b]
		q := fgDot(ev.x[a], ev.u[b])
		det := maa*mbb - q*q
		if !(maa > fgSingularPivot) || !(det/maa > fgSingularPivot) {
			return fgSkipped, -1, 0
		}
		ea, eb := s.e[ev.pool[a]], s.e[ev.pool[b]]
		ev.inv[0], ev.inv[1], ev.inv[2] = mbb/det, q/det, maa/det
		ev.w[0] = ev.inv[0]*ea + ev.inv[1]*eb
		ev.w[1] = ev.inv[1]*ea + ev.inv[2]*eb
		rss = s.rss - (ea*ev.w[0] + eb*ev.w[1])
	default:
		if !ev.factor(set) {
			return fgSkipped, -1, 0
		}
		rss = s.rss - fgDot(ev.v, ev.v) // e'M^-1 e = |L^-1 e|²
		for a := m - 1; a >= 0; a-- {
			sum := ev.v[a]
			for k := a + 1; k < m; k++ {
				sum -= ev.l[k*m+a] * ev.w[k]
			}
			ev.w[a] = sum / ev.l[a*m+a]
		}
	}
	if rss < 0 {
		rss = 0
	}
	// Δb = U_S w.
	for j := 0; j < p; j++ {
		ev.db[j] = 0
	}
	for a := 0; a < m; a++ {
		u, wa := ev.u[set[a]], ev.w[a]
		for j := 0; j < p; j++ {
			ev.db[j] += u[j] * wa
		}
	}
	df := s.df - m
	s2 := rss / float64(df)
	for k, ch := range ev.checks {
		switch ch.kind {
		case fgKindSign:
			after := s.b[ch.j] - ev.db[ch.j]
			if math.Abs(after) <= ch.half || fgSign(after) != fgSign(ev.center[k]) {
				return fgBreaks, k, after
			}
		case fgKindBand:
			after := s.b[ch.j] - ev.db[ch.j]
			if math.Abs(after-ev.center[k]) > ch.half*(1+fgTie) {
				return fgBreaks, k, after
			}
		case fgKindSig:
			after := s.b[ch.j] - ev.db[ch.j]
			cjj := s.c[ch.j*p+ch.j] + ev.quadU(set, ch.j)
			t := after / math.Sqrt(s2*cjj)
			sig := math.Abs(t) > ev.tcrit
			if sig != ev.sig[k] {
				pv := TTail2(t, float64(df))
				// Confirm with the p-value itself at the boundary.
				if (pv < ch.alpha) != ev.sig[k] {
					return fgBreaks, k, pv
				}
			}
		case fgKindCheckpoint:
			var dy float64
			for a := 0; a < m; a++ {
				dy += ev.g[k][set[a]] * ev.w[a]
			}
			after := fgDot(ch.x0, s.b) - dy
			if math.Abs(after-ev.center[k]) > ch.half*(1+fgTie) {
				return fgBreaks, k, after
			}
		}
	}
	return fgHolds, -1, 0
}

// trapped reports whether removing set leaves a response Refit refuses.
func (ev *fragEval) trapped(set []int) bool {
	for _, t := range ev.s.traps {
		if len(t) > len(set) {
			continue
		}
		all := true
		for _, r := range t {
			in := false
			for _, a := range set {
				if ev.pool[a] == r {
					in = true
					break
				}
			}
			if !in {
				all = false
				break
			}
		}
		if all {
			return true
		}
	}
	return false
}

// factor computes the lower Cholesky factor L of M = I - H_SS into l and
// v = L^-1 e_S; false when a pivot is below fgSingularPivot.
func (ev *fragEval) factor(set []int) bool {
	s, m := ev.s, ev.m
	if m == 3 {
		// Unrolled: the ranked search spends most of its subsets here.
		a, b, c := set[0], set[1], set[2]
		a11, a22, a33 := 1-ev.h[a], 1-ev.h[b], 1-ev.h[c]
		a21 := -fgDot(ev.x[b], ev.u[a])
		a31 := -fgDot(ev.x[c], ev.u[a])
		a32 := -fgDot(ev.x[c], ev.u[b])
		if !(a11 > fgSingularPivot) {
			return false
		}
		l11 := math.Sqrt(a11)
		l21, l31 := a21/l11, a31/l11
		d2 := a22 - l21*l21
		if !(d2 > fgSingularPivot) {
			return false
		}
		l22 := math.Sqrt(d2)
		l32 := (a32 - l31*l21) / l22
		d3 := a33 - l31*l31 - l32*l32
		if !(d3 > fgSingularPivot) {
			return false
		}
		l33 := math.Sqrt(d3)
		l := ev.l[:9]
		l[0], l[3], l[4], l[6], l[7], l[8] = l11, l21, l22, l31, l32, l33
		ea, eb, ec := s.e[ev.pool[a]], s.e[ev.pool[b]], s.e[ev.pool[c]]
		v0 := ea / l11
		v1 := (eb - l21*v0) / l22
		v2 := (ec - l31*v0 - l32*v1) / l33
		ev.v[0], ev.v[1], ev.v[2] = v0, v1, v2
		return true
	}
	for a := 0; a < m; a++ {
		xa := ev.x[set[a]]
		for b := 0; b <= a; b++ {
			var v float64
			if a == b {
				v = 1 - ev.h[set[a]]
			} else {
				v = -fgDot(xa, ev.u[set[b]])
			}
			ev.mm[a*m+b] = v
		}
		ev.es[a] = s.e[ev.pool[set[a]]]
	}
	for a := 0; a < m; a++ {
		for b := 0; b <= a; b++ {
			sum := ev.mm[a*m+b]
			for k := 0; k < b; k++ {
				sum -= ev.l[a*m+k] * ev.l[b*m+k]
			}
			if a == b {
				if !(sum > fgSingularPivot) {
					return false
				}
				ev.l[a*m+a] = math.Sqrt(sum)
			} else {
				ev.l[a*m+b] = sum / ev.l[b*m+b]
			}
		}
	}
	for a := 0; a < m; a++ {
		sum := ev.es[a]
		for k := 0; k < a; k++ {
			sum -= ev.l[a*m+k] * ev.v[k]
		}
		ev.v[a] = sum / ev.l[a*m+a]
	}
	return true
}

// quadU returns (U_S M^-1 U_S')_jj (|L^-1 U_S[:, j]|² in general).
func (ev *fragEval) quadU(set []int, j int) float64 {
	m := ev.m
	switch m {
	case 1:
		u := ev.u[set[0]][j]
		return u * u * ev.inv[0]
	case 2:
		ua, ub := ev.u[set[0]][j], ev.u[set[1]][j]
		return ua*ua*ev.inv[0] + 2*ua*ub*ev.inv[1] + ub*ub*ev.inv[2]
	}
	var q float64
	for a := 0; a < m; a++ {
		sum := ev.u[set[a]][j]
		for k := 0; k < a; k++ {
			sum -= ev.l[a*m+k] * ev.cs[k]
		}
		ev.cs[a] = sum / ev.l[a*m+a]
		q += ev.cs[a] * ev.cs[a]
	}
	return q
}

func fgSign(v float64) int {
	switch {
	case v > 0:
		return 1
	case v < 0:
		return -1
	}
	return 0
}

// searchRanked runs the size-by-size search; ranked (0-based rows, most
// influential first) is used for sizes that cannot be searched
// exhaustively, and may be nil when every size can.
func (s *fragSearch) searchRanked(checks []fragCheck, ranked []int, opt FragilityOptions) FragilityResult {
	res := FragilityResult{MaxRemoved: opt.MaxRemoved, Limit: opt.Limit}
	left := opt.Budget
	ev := s.newEvaluator(checks)
	// A unit is a pool searched in turn: rows lo..hi-1, or an explicit
	// list (the ranked candidates). For m = 1 the rows go in blocks, to
	// bound memory.
	type unit struct {
		lo, hi int
		list   []int
	}
	var loaded unit
	haveLoaded := false
	var rowsBuf []int
	for m := 1; m <= opt.MaxRemoved && m < s.df; m++ {
		step := SearchStep{Removed: m}
		var units []unit
		if k := fgBinom(s.n, m); k <= float64(left) {
			step.Exhaustive, step.Candidates = true, s.n
			if m == 1 {
				for lo := 0; lo < s.n; lo += fgBlock {
					units = append(units, unit{lo: lo, hi: min(lo+fgBlock, s.n)})
				}
			} else {
				units = []unit{{lo: 0, hi: s.n}}
			}
		} else {
			L := min(len(ranked), opt.Candidates)
			for L >= m && fgBinom(L, m) > float64(left) {
				L--
			}
			if L < m {
				break
			}
			pool := append([]int(nil), ranked[:L]...)
			sort.Ints(pool)
			units = []unit{{list: pool}}
			step.Candidates = L
		}
		ev.setSize(m)
		found := false
		for _, u := range units {
			same := haveLoaded && loaded.lo == u.lo && loaded.hi == u.hi &&
				fgSamePool(loaded.list, u.list)
			if !same {
				pool := u.list
				if pool == nil {
					rowsBuf = rowsBuf[:0]
					for i := u.lo; i < u.hi; i++ {
						rowsBuf = append(rowsBuf, i)
					}
					pool = rowsBuf
				}
				ev.load(pool)
				loaded, haveLoaded = u, true
			}
			if found = ev.run(&step, &res); found {
				break
			}
		}
		left -= step.Subsets
		res.Evaluated += step.Subsets
		res.Steps = append(res.Steps, step)
		if found {
			break
		}
	}
	res.Searched = fgDescribe(res.Steps)
	res.Fragile = res.Index > 0 && res.Index <= res.Limit
	return res
}

// fgBlock is the number of rows loaded at a time for the m = 1 pass.
const fgBlock = 1024

// fgSamePool reports whether a and b are the same rows.
func fgSamePool(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// run evaluates every ev.m-subset of the loaded pool in lexicographic
// order, recording the first break in res; it reports whether one was
// found.
func (ev *fragEval) run(step *SearchStep, res *FragilityResult) bool {
	m := ev.m
	set := make([]int, m)
	for a := range set {
		set[a] = a
	}
	np := len(ev.pool)
	if np < m {
		return false
	}
	for {
		out, k, after := ev.eval(set)
		step.Subsets++
		switch out {
		case fgSkipped:
			res.Skipped++
		case fgBreaks:
			ch := ev.checks[k]
			res.Index = m
			res.RemovedRows = make([]int, m)
			for a := range set {
				res.RemovedRows[a] = ev.pool[set[a]] + 1
			}
			res.Conclusion, res.Kind, res.Term = ch.text, fragKindNames[ch.kind], ch.term
			res.After = after
			res.Before = ev.before[k]
			return true
		}
		if !fgNextComb(set, np) {
			return false
		}
	}
}

// fgNextComb advances set to the next m-subset of 0..n-1 in
// lexicographic order; false when set was the last.
func fgNextComb(set []int, n int) bool {
	m := len(set)
	a := m - 1
	for a >= 0 && set[a] == n-m+a {
		a--
	}
	if a < 0 {
		return false
	}
	set[a]++
	for b := a + 1; b < m; b++ {
		set[b] = set[b-1] + 1
	}
	return true
}

// fgBinom returns C(n, k) as a float (exact while below 2^53).
func fgBinom(n, k int) float64 {
	if k < 0 || k > n {
		return 0
	}
	r := 1.0
	for i := 1; i <= k; i++ {
		r = r * float64(n-k+i) / float64(i)
	}
	return math.Round(r)
}

func fgDescribe(steps []SearchStep) string {
	if len(steps) == 0 {
		return "none (too few rows)"
	}
	var ex, top []int
	cands := map[int]bool{}
	for _, st := range steps {
		if st.Exhaustive {
			ex = append(ex, st.Removed)
		} else {
			top = append(top, st.Removed)
			cands[st.Candidates] = true
		}
	}
	if len(top) == 0 {
		return "exhaustive"
	}
	var tops []string
	if len(cands) == 1 {
		tops = []string{fmt.Sprintf("top %d candidates", steps[len(steps)-1].Candidates)}
	} else {
		for _, st := range steps {
			if !st.Exhaustive {
				tops = append(tops, fmt.Sprintf("top %d candidates for %d", st.Candidates, st.Removed))
			}
		}
	}
	if len(ex) == 0 {
		return strings.Join(tops, ", ")
	}
	exs := fmt.Sprintf("exhaustive for %s removed", fgSpan(ex))
	if len(cands) == 1 {
		return exs + ", " + tops[0] + " for " + fgSpan(top)
	}
	return exs + ", " + strings.Join(tops, ", ")
}

func fgSpan(ms []int) string {
	if len(ms) == 1 {
		return strconv.Itoa(ms[0])
	}
	return fmt.Sprintf("%d-%d", ms[0], ms[len(ms)-1])
}

// fgRankRows returns up to k rows (0-based) taken round robin from the
// rankings by Cook's distance, leverage, |DFBETAS_j| for each coefficient
// and |external studentized residual|, most influential first. NaN values
// rank last.
func fgRankRows(inf *Influence, b []float64, k int) []int {
	rows := inf.Rows
	n := len(rows)
	if k > n {
		k = n
	}
	keys := []func(i int) float64{
		func(i int) float64 { return rows[i].Cook },
		func(i int) float64 { return rows[i].Leverage },
		func(i int) float64 { return math.Abs(rows[i].StudentExternal) },
	}
	p := inf.Fit.P
	for j := range b {
		keys = append(keys, func(i int) float64 {
			if j < p {
				return math.Abs(inf.DFBETAS[i*p+j])
			}
			return math.NaN()
		})
	}
	lists := make([][]int, len(keys))
	for q, key := range keys {
		lists[q] = fgTopK(n, k, key)
	}
	out := make([]int, 0, k)
	seen := make(map[int]bool, k)
	for pos := 0; len(out) < k; pos++ {
		progress := false
		for _, l := range lists {
			if pos < len(l) {
				progress = true
				if i := l[pos]; !seen[i] {
					seen[i] = true
					out = append(out, i)
					if len(out) == k {
						break
					}
				}
			}
		}
		if !progress {
			break
		}
	}
	return out
}

// fgTopK returns the indices of the k largest values of val over 0..n-1,
// largest first (ties by lower index; NaN lowest).
func fgTopK(n, k int, val func(i int) float64) []int {
	if k <= 0 {
		return nil
	}
	type item struct {
		v float64
		i int
	}
	less := func(a, b item) bool { // a ranks below b
		if a.v != b.v {
			return a.v < b.v
		}
		return a.i > b.i
	}
	h := make([]item, 0, k) // min-heap on rank
	down := func(a int) {
		for {
			l := 2*a + 1
			if l >= len(h) {
				return
			}
			c := l
			if r := l + 1; r < len(h) && less(h[r], h[l]) {
				c = r
			}
			if !less(h[c], h[a]) {
				return
			}
			h[a], h[c] = h[c], h[a]
			a = c
		}
	}
	for i := 0; i < n; i++ {
		v := val(i)
		if math.IsNaN(v) {
			v = math.Inf(-1)
		}
		it := item{v, i}
		if len(h) < k {
			h = append(h, it)
			for c := len(h) - 1; c > 0; {
				par := (c - 1) / 2
				if !less(h[c], h[par]) {
					break
				}
				h[c], h[par] = h[par], h[c]
				c = par
			}
			continue
		}
		if less(h[0], it) {
			h[0] = it
			down(0)
		}
	}
	sort.Slice(h, func(a, b int) bool { return less(h[b], h[a]) })
	out := make([]int, len(h))
	for a, it := range h {
		out[a] = it.i
	}
	return out
}

func fgDot(a, b []float64) float64 {
	var s float64
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// fgMatVec sets dst = A x for a p x p row-major A.
func fgMatVec(dst, a, x []float64, p int) {
	for j := 0; j < p; j++ {
		dst[j] = fgDot(a[j*p:(j+1)*p], x)
	}
}
