package engine

// Where to collect more data.
//
// Suggest ranks candidate points of the operating region by what adding
// readings there would do. Candidates live in the space of the predictor
// columns (not of the terms): each is turned into a design row z by
// Model.DesignRow, so x, x^2 and log(x) of one column move together.
//
// A new reading is assumed to land on the current fit: its residual is 0,
// the coefficients and the residual sum of squares do not change, and the
// residual degrees of freedom grow by one per reading. With C = (X'X)^-1,
// u = C z and d = z'u = z'(X'X)^-1 z, r readings at z give
//
//	det(X'X + r zz') / det(X'X) = 1 + r d            (D-optimal gain)
//	C_new = C - r u u' / (1 + r d)                   (Sherman-Morrison)
//	h_i,new = h_i - r (x_i'u)² / (1 + r d)
//
// so r readings exactly at a row with leverage h leave it h/(1 + r h).
// Cook's distance of row i becomes e_i² h_i,new / (p s²_new (1-h_i,new)²)
// with s²_new = RSS/(n + r - p). The fragility index after the readings
// is searched as by Fragility, on the downdated fit with the r readings
// added, removal sets drawn from the recorded rows only; bands and
// checkpoints keep their full-data centres and widths, and significance
// is judged against the augmented fit's own verdict.
//
// # Ranking
//
// The candidates are first ordered by the Criterion's score, and the Pool
// best of them that lie at least Separation apart are kept. For each of
// those the fragility index after the readings is computed, and they are
// ranked by what the readings achieve:
//
//  1. those after which the fit is no longer fragile come first;
//  2. then the larger rise of the fragility index (an index of 0, no
//     breaking set up to MaxRemoved, counts as MaxRemoved + 1);
//  3. then the Criterion's score: the D-optimal gain 1 + r d, or, when
//     Judge flagged rows (CriterionAuto), the drop of their Cook's
//     distances, ties broken by the D-optimal gain.
//
// A point after whose readings the index is lower (the fit would rest on
// fewer rows) is not offered at all: adding data there would make the
// conclusions easier to overturn, which is the opposite of coverage. So
// no listed suggestion does less for the index than one below it, and
// fewer than Top may be listed.
//
// # Suspect readings
//
// The default region is the range of the rows not judged suspect
// (RegionExcludingSuspect), so that one wrong reading far outside the
// operating range does not pull the suggestions out to it. The settings
// of suspect readings inside the region are candidates too; a suggestion
// within Near of such a setting has Kind SuggestRemeasure and is worded
// "re-measure near ...": readings there check the suspect one rather than
// cover new ground.

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
)

// ErrRegion marks an operating region that cannot be used: a column of
// the model missing, a bound that is not finite, or lo > hi. The error is
// a *RegionError.
var ErrRegion = errors.New("engine: invalid operating region")

// RegionError reports a problem with one column of a Region. It wraps
// ErrRegion.
type RegionError struct {
	Column string
	Msg    string
}

func (e *RegionError) Error() string {
	return fmt.Sprintf("engine: region, column %q: %s", e.Column, e.Msg)
}

func (e *RegionError) Unwrap() error { return ErrRegion }

// Region is the operating region: for each predictor column, the closed
// interval [lo, hi] of values where readings may be taken.
type Region map[string][2]float64

// RegionOf returns the observed range of each predictor column of m in
// cols (non-finite values ignored).
func RegionOf(m Model, cols map[string][]float64) (Region, error) {
	reg := Region{}
	for _, c := range m.Columns() {
		v, ok := cols[c]
		if !ok {
			return nil, &RegionError{Column: c, Msg: "column missing from the data"}
		}
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, x := range v {
			if math.IsNaN(x) || math.IsInf(x, 0) {
				continue
			}
			lo, hi = math.Min(lo, x), math.Max(hi, x)
		}
		if lo > hi {
			return nil, &RegionError{Column: c, Msg: "no finite values"}
		}
		reg[c] = [2]float64{lo, hi}
	}
	return reg, nil
}

// RegionExcludingSuspect returns, for each predictor column of m, the
// range of the rows of cols whose verdict in v is not "suspect" (both an
// outlier and influential; see Verdict.Word), non-finite values ignored.
// It is the default operating region of Suggest: a suspect reading far
// outside the others does not widen it. v[i] is the verdict of row i of
// every column; a length mismatch is a caller bug and panics. When every
// row is suspect, the range of all rows is returned.
func RegionExcludingSuspect(m Model, cols map[string][]float64, v []Verdict) (Region, error) {
	keep := make(map[string][]float64, len(cols))
	anyKept := false
	for _, c := range m.Columns() {
		x, ok := cols[c]
		if !ok {
			return nil, &RegionError{Column: c, Msg: "column missing from the data"}
		}
		if len(x) != len(v) {
			panic(fmt.Sprintf("engine: RegionExcludingSuspect: column %q has %d rows, %d verdicts", c, len(x), len(v)))
		}
		var k []float64
		for i, xi := range x {
			if v[i].Word() != "suspect" {
				k = append(k, xi)
			}
		}
		keep[c] = k
		anyKept = anyKept || len(k) > 0
	}
	if !anyKept {
		return RegionOf(m, cols)
	}
	return RegionOf(m, keep)
}

// ObservedRegion recovers the observed range of each predictor column from
// the design of f. A column can be recovered when some term is that
// column alone, its log, or an odd power of either; otherwise the error
// (a *RegionError) asks for an explicit Region (see RegionOf).
func ObservedRegion(f *Fit) (Region, error) {
	cols, err := DesignColumns(f)
	if err != nil {
		return nil, err
	}
	return RegionOf(f.Model, cols)
}

// DesignColumns recovers the values of each predictor column, row by row,
// from the design of f, as ObservedRegion does (errors alike).
func DesignColumns(f *Fit) (map[string][]float64, error) {
	X := f.X()
	off := 0
	if f.Model.Intercept {
		off = 1
	}
	out := make(map[string][]float64)
	// Design column of each term (a group term spans several).
	col := make([]int, len(f.Model.Terms))
	for k := range f.Model.Terms {
		col[k] = off
		off += f.Model.termWidth(k)
	}
	for _, c := range f.Model.Columns() {
		found := false
		for k, t := range f.Model.Terms {
			if len(t.Factors) != 1 || t.Factors[0].Column != c || t.Factors[0].Power%2 == 0 || t.Factors[0].Group {
				continue
			}
			fc := t.Factors[0]
			vals := make([]float64, f.N)
			for i := 0; i < f.N; i++ {
				v := X.At(i, col[k])
				if fc.Power != 1 {
					v = math.Copysign(math.Pow(math.Abs(v), 1/float64(fc.Power)), v)
				}
				if fc.Log {
					v = math.Exp(v)
				}
				vals[i] = v
			}
			out[c] = vals
			found = true
			break
		}
		if !found {
			return nil, &RegionError{Column: c, Msg: "its range cannot be recovered from the terms; pass a Region (RegionOf)"}
		}
	}
	return out, nil
}

// Criterion orders candidate points.
type Criterion int

const (
	// CriterionAuto uses CriterionInfluence when Judge flagged some row
	// as influential or as notable by leverage, else CriterionDOptimal.
	CriterionAuto Criterion = iota
	// CriterionDOptimal ranks by d(z) = z'(X'X)^-1 z, the sequential
	// D-optimal rule (largest det(X'X) gain).
	CriterionDOptimal
	// CriterionInfluence ranks by the total drop in Cook's distance of the
	// watched rows (by the drop in their leverage when all their
	// residuals are zero), ties broken by d(z).
	CriterionInfluence
)

// SuggestOptions tunes Suggest. Zero fields take the defaults.
type SuggestOptions struct {
	// Replicates is the number r of readings proposed per point
	// (default 3).
	Replicates int
	// MaxReplicates bounds the search for the smallest r that ends the
	// fragility (default 20).
	MaxReplicates int
	// Top is the number of suggestions (default 3).
	Top int
	// Pool is the number of distinct points, best by the Criterion,
	// whose effect on the fragility index is computed before they are
	// ranked (default 2 x Top; at least Top).
	Pool int
	// Grid is the number of grid points per axis for up to three
	// predictor columns (default 201, 41 and 21 for 1, 2 and 3 columns).
	Grid int
	// Points is the size of the space-filling set used beyond three
	// columns (default 2000): a Halton sequence shifted by Seed
	// (Cranley-Patterson rotation; Seed 0 leaves it unshifted), plus the
	// region's corners when there are at most Points/2 of them.
	Points int
	Seed   uint64
	// Separation is the least distance between two suggestions, in
	// region coordinates scaled to [0, 1] per column (default 0.25).
	Separation float64
	// Criterion orders the candidates (default CriterionAuto).
	Criterion Criterion
	// Conclusions and Fragility are used for the fragility index.
	Conclusions Conclusions
	Fragility   FragilityOptions
	// Before, when set, is the result of Fragility for the same fit,
	// Conclusions and Fragility options, computed already by the caller;
	// Suggest then does not search the current fit again.
	Before *FragilityResult
	// Label names a 1-based data row in the text (default "row 212").
	Label func(row int) string
	// Data, when set, holds the predictor columns of the fit's rows, in
	// the order of its design (as given to Model.Design). It gives the
	// settings of suspect readings and, with region nil, the default
	// region. When nil they are recovered from the design
	// (DesignColumns); when that is not possible the default region is
	// an error and no suggestion is typed as a re-measurement.
	Data map[string][]float64
	// Near is the distance, in region coordinates scaled to [0, 1] per
	// column, within which a suggestion counts as at a suspect reading's
	// setting (default 0.05).
	Near float64
}

// Kinds of Suggestion.
const (
	// SuggestCoverage: readings where the data are thin.
	SuggestCoverage = "coverage"
	// SuggestRemeasure: readings at the setting of a reading judged
	// suspect, to check it ("re-measure near ...").
	SuggestRemeasure = "remeasure"
)

// RowEffect is the effect of the proposed readings on one watched row
// (1-based data row).
type RowEffect struct {
	Row                           int
	LeverageBefore, LeverageAfter float64
	CookBefore, CookAfter         float64
}

// Effect is what the proposed readings would do.
type Effect struct {
	// DetRatio is det(X'X) after the readings over det(X'X) now: 1 + r d.
	DetRatio float64
	// Rows are the watched rows: those Judge marked influential or
	// notable by leverage (at most 10, largest Cook's distance first), or
	// the three of highest leverage when none was marked.
	Rows []RowEffect
	// FragilityBefore and FragilityAfter are the fragility indices now
	// and after the readings (0: none found up to MaxRemoved);
	// FragileBefore and FragileAfter say whether each is at most Limit.
	FragilityBefore, FragilityAfter int
	FragileBefore, FragileAfter     bool
	// EndsFragility is the smallest number of readings at this point,
	// up to MaxReplicates, after which the fit is no longer fragile; 0
	// when the fit is not fragile now or no such number was found.
	EndsFragility int
	// Searched is how the fragility search after the readings was done.
	Searched string
	// IndexGain is how much the readings raise the fragility index,
	// with an index of 0 (none found up to MaxRemoved) counted as
	// MaxRemoved + 1; never negative in a listed suggestion.
	IndexGain int
}

// Suggestion is one proposed point.
type Suggestion struct {
	// Kind is SuggestCoverage or SuggestRemeasure.
	Kind string
	// Suspect lists the 1-based data rows judged suspect whose setting
	// is within Near of At (set for SuggestRemeasure).
	Suspect []int
	// At gives the predictor columns' values.
	At map[string]float64
	// Replicates is the number of readings proposed there.
	Replicates int
	// D is d(z) = z'(X'X)^-1 z, the variance of the fitted value there
	// in units of sigma²; DGain = 1 + D is the det(X'X) gain of one
	// reading.
	D, DGain float64
	Effect   Effect
	// Text says it in words, e.g. "add 3 readings near emf_mv = 47.5:
	// leverage of row 212 falls 0.41 -> 0.17, ...".
	Text string
}

// suggestion defaults
const (
	DefaultReplicates    = 3
	DefaultMaxReplicates = 20
	DefaultTop           = 3
	DefaultPoints        = 2000
	DefaultSeparation    = 0.25
	DefaultNear          = 0.05
	maxWatched           = 10
)

// Suggest proposes where in region to take more readings, best first (see
// the file documentation). inf and v may be nil (then Diagnose and Judge
// with DefaultCutoffs are used); region nil means the range of the rows
// not judged suspect (RegionExcludingSuspect on opt.Data, or on the
// columns recovered from the design).
// Errors: *RegionError, *ConclusionError.
func Suggest(f *Fit, inf *Influence, v []Verdict, region Region, opt SuggestOptions) ([]Suggestion, error) {
	if opt.Replicates <= 0 {
		opt.Replicates = DefaultReplicates
	}
	if opt.MaxReplicates <= 0 {
		opt.MaxReplicates = DefaultMaxReplicates
	}
	if opt.Top <= 0 {
		opt.Top = DefaultTop
	}
	if opt.Pool < opt.Top {
		opt.Pool = max(opt.Top, 2*opt.Top)
	}
	if opt.Points <= 0 {
		opt.Points = DefaultPoints
	}
	if opt.Separation <= 0 {
		opt.Separation = DefaultSeparation
	}
	if opt.Near <= 0 {
		opt.Near = DefaultNear
	}
	if opt.Label == nil {
		opt.Label = func(row int) string { return "row " + strconv.Itoa(row) }
	}
	fopt := opt.Fragility.withDefaults()
	checks, err := fgCompile(f, opt.Conclusions)
	if err != nil {
		return nil, err
	}
	cols := f.Model.Columns()
	if len(cols) == 0 {
		return nil, &RegionError{Column: "", Msg: "the model has no predictor columns"}
	}
	if g := f.Model.GroupColumns(); len(g) > 0 {
		return nil, &RegionError{Column: g[0], Msg: "a group column: suggestions for models with group terms are not made yet"}
	}
	if wt := f.Model.Weight; f.Weights != nil && (wt.Power == 0 || !slices.Contains(cols, wt.Column)) {
		// The weight of a reading not yet taken is known only from a
		// variance function of a predictor.
		return nil, fmt.Errorf("%w: the weights of new readings are unknown (weights from column %q); suggestions need weights that are a variance function of a predictor, such as inverse(x^2)", ErrWeightUnknown, wt.Column)
	}
	if inf == nil {
		inf = Diagnose(f)
	}
	if v == nil {
		v = Judge(inf, DefaultCutoffs())
	}
	// The predictor values of the rows: given, or recovered.
	data, dataErr := opt.Data, error(nil)
	if data != nil {
		for _, c := range cols {
			if len(data[c]) != f.N {
				return nil, &RegionError{Column: c, Msg: fmt.Sprintf("Data has %d values, the fit %d rows", len(data[c]), f.N)}
			}
		}
	} else {
		data, dataErr = DesignColumns(f)
	}
	if region == nil {
		if dataErr != nil {
			return nil, dataErr
		}
		vn := v
		if len(vn) != f.N { // a short verdict list: the rest count as not suspect
			vn = make([]Verdict, f.N)
			copy(vn, v)
		}
		if region, err = RegionExcludingSuspect(f.Model, data, vn); err != nil {
			return nil, err
		}
	}
	lo, hi := make([]float64, len(cols)), make([]float64, len(cols))
	for k, c := range cols {
		b, ok := region[c]
		if !ok {
			return nil, &RegionError{Column: c, Msg: "not in the region"}
		}
		if math.IsNaN(b[0]) || math.IsNaN(b[1]) || math.IsInf(b[0], 0) || math.IsInf(b[1], 0) {
			return nil, &RegionError{Column: c, Msg: "bounds must be finite"}
		}
		if b[0] > b[1] {
			return nil, &RegionError{Column: c, Msg: fmt.Sprintf("lower bound %v above upper bound %v", b[0], b[1])}
		}
		lo[k], hi[k] = b[0], b[1]
	}
	// Settings of the suspect readings (when the data are known).
	type setting struct {
		row int // 0-based
		pt  []float64
	}
	var suspects []setting
	if dataErr == nil {
		for i := 0; i < f.N && i < len(v); i++ {
			if v[i].Word() != "suspect" {
				continue
			}
			pt := make([]float64, len(cols))
			for k, c := range cols {
				pt[k] = data[c][i]
			}
			suspects = append(suspects, setting{row: i, pt: pt})
		}
	}
	scaledDist := func(a, b []float64) float64 {
		var dist float64
		for k := range cols {
			if hi[k] > lo[k] {
				dk := (a[k] - b[k]) / (hi[k] - lo[k])
				dist += dk * dk
			}
		}
		return math.Sqrt(dist)
	}
	// nearDist is scaledDist for a suggestion and a suspect setting: a
	// column of zero width counts only when the values differ.
	nearDist := func(a, b []float64) float64 {
		for k := range cols {
			if hi[k] == lo[k] && a[k] != b[k] {
				return math.Inf(1)
			}
		}
		return scaledDist(a, b)
	}
	watched, flagged := sgWatched(inf, v)
	crit := opt.Criterion
	if crit == CriterionAuto {
		crit = CriterionDOptimal
		if flagged {
			crit = CriterionInfluence
		}
	}

	base := fgBaseSearch(f, fopt.MaxRemoved)
	p := f.P
	r := float64(opt.Replicates)
	s2new := f.RSS / float64(f.N+opt.Replicates-p)
	var sumCook float64
	for _, i := range watched {
		if c := inf.Rows[i].Cook; !math.IsNaN(c) {
			sumCook += c
		}
	}

	// Score every candidate: the grid or space-filling set, and the
	// settings of suspect readings inside the region.
	pts := sgCandidates(lo, hi, opt)
	for _, sp := range suspects {
		inside := true
		for k := range cols {
			inside = inside && sp.pt[k] >= lo[k] && sp.pt[k] <= hi[k]
		}
		if inside {
			pts = append(pts, sp.pt)
		}
	}
	colIdx := make(map[string]int, len(cols))
	for k, c := range cols {
		colIdx[c] = k
	}
	type scored struct {
		pt         []float64
		d, primary float64
	}
	var cands []scored
	z := make([]float64, p)
	u := make([]float64, p)
	for _, pt := range pts {
		if err := sgRow(f, z, func(col string) float64 { return pt[colIdx[col]] }); err != nil {
			continue // outside the domain of a term (log of a non-positive value)
		}
		fgMatVec(u, base.c, z, p)
		d := fgDot(z, u)
		sc := scored{pt: pt, d: d}
		if crit == CriterionInfluence {
			for _, i := range watched {
				o := inf.Rows[i]
				q := fgDot(base.rows(i), u)
				hn := o.Leverage - r*q*q/(1+r*d)
				if sumCook > 0 {
					e2 := o.Residual * o.Residual * f.weightAt(i) // weighted: w e²
					sc.primary += sgCook(o.Cook) - sgCook(e2*hn/(float64(p)*s2new*(1-hn)*(1-hn)))
				} else {
					sc.primary += o.Leverage - hn
				}
			}
		} else {
			sc.primary = d
		}
		cands = append(cands, sc)
	}
	sort.SliceStable(cands, func(a, b int) bool {
		if cands[a].primary != cands[b].primary {
			return cands[a].primary > cands[b].primary
		}
		return cands[a].d > cands[b].d
	})

	// The pool: the best distinct points by the criterion.
	var picks []scored
	for _, c := range cands {
		if len(picks) == opt.Pool {
			break
		}
		far := true
		for _, q := range picks {
			if scaledDist(c.pt, q.pt) < opt.Separation {
				far = false
				break
			}
		}
		if far {
			picks = append(picks, c)
		}
	}

	var ranked []int
	if fgNeedsRanking(f.N, fopt) {
		ranked = fgRankRows(inf, base.b, fopt.Candidates)
	}
	// Design rows of the picks.
	zs := make([][]float64, 0, len(picks))
	kept := picks[:0]
	for _, c := range picks {
		zc := make([]float64, p)
		if err := sgRow(f, zc, func(col string) float64 { return c.pt[colIdx[col]] }); err != nil {
			continue
		}
		zs = append(zs, zc)
		kept = append(kept, c)
	}
	picks = kept

	// Fragility now and after the readings at each point of the pool:
	// independent searches, run on up to two cores.
	var before FragilityResult
	afters := make([]FragilityResult, len(picks))
	sgParallel(1+len(picks), func(k int) {
		if k == 0 {
			if opt.Before != nil {
				before = *opt.Before
			} else {
				before = base.searchRanked(checks, ranked, fopt)
			}
			return
		}
		afters[k-1] = base.augmented(zs[k-1], opt.Replicates).searchRanked(checks, ranked, fopt)
	})

	// Rank by what the readings achieve (see the file documentation);
	// drop the points that would lower the index.
	eff := func(idx int) int {
		if idx == 0 {
			return fopt.MaxRemoved + 1
		}
		return idx
	}
	order := make([]int, 0, len(picks))
	for k := range picks {
		if eff(afters[k].Index) >= eff(before.Index) {
			order = append(order, k)
		}
	}
	ends := func(k int) bool { return before.Fragile && !afters[k].Fragile }
	sort.SliceStable(order, func(a, b int) bool {
		ka, kb := order[a], order[b]
		if ends(ka) != ends(kb) {
			return ends(ka)
		}
		return afters[ka].Index != afters[kb].Index && eff(afters[ka].Index) > eff(afters[kb].Index)
	})
	if len(order) > opt.Top {
		order = order[:opt.Top]
	}

	// The fewest readings that end the fragility, at each listed point.
	endsAt := make([]int, len(order))
	if before.Fragile {
		sgParallel(len(order), func(j int) {
			k := order[j]
			fragileWith := func(rr int) bool {
				return base.augmented(zs[k], rr).searchRanked(checks, ranked, fopt).Fragile
			}
			if !afters[k].Fragile {
				endsAt[j] = opt.Replicates
				for rr := 1; rr < opt.Replicates; rr++ {
					if !fragileWith(rr) {
						endsAt[j] = rr
						break
					}
				}
				return
			}
			for rr := opt.Replicates + 1; rr <= opt.MaxReplicates; rr++ {
				if !fragileWith(rr) {
					endsAt[j] = rr
					break
				}
			}
		})
	}

	out := make([]Suggestion, 0, len(order))
	for j, k := range order {
		c := picks[k]
		sg := Suggestion{Kind: SuggestCoverage, At: make(map[string]float64, len(cols)), Replicates: opt.Replicates, D: c.d, DGain: 1 + c.d}
		for jj, col := range cols {
			sg.At[col] = c.pt[jj]
		}
		for _, sp := range suspects {
			if nearDist(c.pt, sp.pt) <= opt.Near {
				sg.Kind = SuggestRemeasure
				sg.Suspect = append(sg.Suspect, sp.row+1)
			}
		}
		fgMatVec(u, base.c, zs[k], p)
		ef := Effect{DetRatio: 1 + r*c.d, FragilityBefore: before.Index, FragileBefore: before.Fragile}
		for _, i := range watched {
			o := inf.Rows[i]
			q := fgDot(base.rows(i), u)
			hn := o.Leverage - r*q*q/(1+r*c.d)
			ef.Rows = append(ef.Rows, RowEffect{
				Row: i + 1, LeverageBefore: o.Leverage, LeverageAfter: hn,
				CookBefore: o.Cook, CookAfter: o.Residual * o.Residual * hn / (float64(p) * s2new * (1 - hn) * (1 - hn)),
			})
		}
		after := afters[k]
		ef.FragilityAfter, ef.FragileAfter, ef.Searched = after.Index, after.Fragile, after.Searched
		ef.IndexGain = eff(after.Index) - eff(before.Index)
		ef.EndsFragility = endsAt[j]
		sg.Effect = ef
		sg.Text = sgText(cols, sg, fopt, opt)
		out = append(out, sg)
	}
	return out, nil
}

// ErrWeightUnknown: Suggest cannot weigh a reading not yet taken, because
// the fit's weights come from a column rather than a variance function of
// a predictor.
var ErrWeightUnknown = errors.New("engine: weight of a new reading unknown")

// sgRow writes the design row of a new reading into z: for a weighted fit
// √w z, with w from the model's variance function (the scaled rows of
// weights.go).
func sgRow(f *Fit, z []float64, value func(col string) float64) error {
	if err := f.Model.DesignRow(z, value); err != nil {
		return err
	}
	if f.Weights == nil {
		return nil
	}
	w, err := f.Model.Weight.RowWeight(value)
	if err != nil {
		return err
	}
	s := math.Sqrt(w)
	for j := range z {
		z[j] *= s
	}
	return nil
}

// sgParallel calls fn(0..n-1) on up to two goroutines and waits for them.
func sgParallel(n int, fn func(k int)) {
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < min(2, n); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				k := int(next.Add(1)) - 1
				if k >= n {
					return
				}
				fn(k)
			}
		}()
	}
	wg.Wait()
}

// sgCook maps an undefined Cook's distance (h = 1) to +Inf so that a drop
// from it counts as large.
func sgCook(c float64) float64 {
	if math.IsNaN(c) {
		return math.MaxFloat64
	}
	return c
}

// sgWatched returns the rows to watch (0-based) and whether Judge flagged
// any of them.
func sgWatched(inf *Influence, v []Verdict) ([]int, bool) {
	var w []int
	for i := range v {
		if i >= len(inf.Rows) {
			break
		}
		if v[i].Influential {
			w = append(w, i)
			continue
		}
		if v[i].Notable {
			for _, fl := range v[i].Flags {
				if fl.Measure == "leverage" {
					w = append(w, i)
					break
				}
			}
		}
	}
	flagged := len(w) > 0
	if !flagged {
		return fgTopK(len(inf.Rows), 3, func(i int) float64 { return inf.Rows[i].Leverage }), false
	}
	// The maxWatched largest Cook's distances (an undefined one first).
	top := fgTopK(len(w), maxWatched, func(k int) float64 { return sgCook(inf.Rows[w[k]].Cook) })
	out := make([]int, len(top))
	for k, t := range top {
		out[k] = w[t]
	}
	return out, true
}

// augmented returns the searcher of the fit with r readings added at
// design row z on the fitted surface.
func (s *fragSearch) augmented(z []float64, r int) *fragSearch {
	p := s.p
	u := make([]float64, p)
	fgMatVec(u, s.c, z, p)
	d := fgDot(z, u)
	k := float64(r) / (1 + float64(r)*d)
	c := make([]float64, p*p)
	for j := 0; j < p; j++ {
		for l := 0; l < p; l++ {
			c[j*p+l] = s.c[j*p+l] - k*u[j]*u[l]
		}
	}
	a := *s
	a.c = c
	a.df = s.df + r
	// The r readings take the fitted value there: a trap stays only if
	// that is the value it leaves.
	yz := fgDot(z, s.b)
	a.traps, a.trapY = nil, nil
	for k, t := range s.traps {
		if s.trapY[k] == yz {
			a.traps = append(a.traps, t)
			a.trapY = append(a.trapY, yz)
		}
	}
	return &a
}

// sgCandidates lists candidate points (one value per column).
func sgCandidates(lo, hi []float64, opt SuggestOptions) [][]float64 {
	k := len(lo)
	axis := func(j, g int) []float64 {
		if hi[j] == lo[j] || g < 2 {
			return []float64{lo[j]}
		}
		v := make([]float64, g)
		for i := range v {
			v[i] = lo[j] + (hi[j]-lo[j])*float64(i)/float64(g-1)
		}
		v[g-1] = hi[j]
		return v
	}
	if k <= 3 {
		g := opt.Grid
		if g <= 0 {
			g = [...]int{201, 41, 21}[k-1]
		}
		axes := make([][]float64, k)
		total := 1
		for j := range axes {
			axes[j] = axis(j, g)
			total *= len(axes[j])
		}
		pts := make([][]float64, 0, total)
		idx := make([]int, k)
		for {
			pt := make([]float64, k)
			for j := range pt {
				pt[j] = axes[j][idx[j]]
			}
			pts = append(pts, pt)
			j := k - 1
			for j >= 0 {
				idx[j]++
				if idx[j] < len(axes[j]) {
					break
				}
				idx[j] = 0
				j--
			}
			if j < 0 {
				return pts
			}
		}
	}
	var pts [][]float64
	if k < 62 && 1<<k <= opt.Points/2 {
		for mask := 0; mask < 1<<k; mask++ {
			pt := make([]float64, k)
			for j := range pt {
				pt[j] = lo[j]
				if mask&(1<<j) != 0 {
					pt[j] = hi[j]
				}
			}
			pts = append(pts, pt)
		}
	}
	shift := make([]float64, k)
	if opt.Seed != 0 {
		rng := rand.New(rand.NewPCG(opt.Seed, 0x9e3779b97f4a7c15))
		for j := range shift {
			shift[j] = rng.Float64()
		}
	}
	primes := sgPrimes(k)
	for i := 1; len(pts) < opt.Points; i++ {
		pt := make([]float64, k)
		for j := range pt {
			t := sgRadicalInverse(i, primes[j]) + shift[j]
			if t >= 1 {
				t--
			}
			pt[j] = lo[j] + (hi[j]-lo[j])*t
		}
		pts = append(pts, pt)
	}
	return pts
}

// sgRadicalInverse is the van der Corput radical inverse of i in base b.
func sgRadicalInverse(i, b int) float64 {
	var v float64
	f := 1 / float64(b)
	for w := f; i > 0; i /= b {
		v += float64(i%b) * w
		w *= f
	}
	return v
}

func sgPrimes(k int) []int {
	var ps []int
	for c := 2; len(ps) < k; c++ {
		prime := true
		for _, q := range ps {
			if q*q > c {
				break
			}
			if c%q == 0 {
				prime = false
				break
			}
		}
		if prime {
			ps = append(ps, c)
		}
	}
	return ps
}

// sgText says the suggestion in words.
func sgText(cols []string, sg Suggestion, fopt FragilityOptions, opt SuggestOptions) string {
	var b strings.Builder
	word := "readings"
	if sg.Replicates == 1 {
		word = "reading"
	}
	at := func() {
		for k, c := range cols {
			if k > 0 {
				b.WriteString(", ")
			}
			fmt.Fprintf(&b, "%s = %s", c, sgNum(sg.At[c], 5))
		}
	}
	if sg.Kind != SuggestRemeasure {
		fmt.Fprintf(&b, "add %d %s near ", sg.Replicates, word)
		at()
	} else {
		b.WriteString("re-measure near ")
		at()
		fmt.Fprintf(&b, " with %d %s", sg.Replicates, word)
		var rows []string
		for _, r := range sg.Suspect {
			rows = append(rows, opt.Label(r))
		}
		verbS := "was"
		if len(rows) > 1 {
			verbS = "were"
		}
		fmt.Fprintf(&b, ", where %s %s judged suspect", strings.Join(rows, " and "), verbS)
	}
	ef := sg.Effect
	// The joint confidence region of the coefficients has a volume
	// proportional to det(X'X)^(-1/2): the readings shrink it by
	// 1 - 1/sqrt(DetRatio).
	if shrink := 1 - 1/math.Sqrt(ef.DetRatio); shrink > 0 && !math.IsInf(ef.DetRatio, 0) {
		fmt.Fprintf(&b, " (the coefficients' joint uncertainty shrinks by %s %%)", sgNum(100*shrink, 2))
	}
	var parts []string
	rows := append([]RowEffect(nil), ef.Rows...)
	sort.SliceStable(rows, func(a, c int) bool {
		return rows[a].LeverageBefore-rows[a].LeverageAfter > rows[c].LeverageBefore-rows[c].LeverageAfter
	})
	for k, re := range rows {
		if k == 2 {
			break
		}
		s := fmt.Sprintf("leverage of %s falls %s -> %s", opt.Label(re.Row), sgNum(re.LeverageBefore, 2), sgNum(re.LeverageAfter, 2))
		if !math.IsNaN(re.CookBefore) {
			s += fmt.Sprintf(", Cook's distance %s -> %s", sgNum(re.CookBefore, 2), sgNum(re.CookAfter, 2))
		}
		parts = append(parts, s)
	}
	idx := func(i int) string {
		if i == 0 {
			return fmt.Sprintf("more than %d", fopt.MaxRemoved)
		}
		return strconv.Itoa(i)
	}
	switch {
	case ef.FragilityBefore == 0 && ef.FragilityAfter == 0:
		parts = append(parts, fmt.Sprintf("no set of up to %d rows changes a conclusion, before or after", fopt.MaxRemoved))
	case ef.FragilityAfter == 0:
		parts = append(parts, fmt.Sprintf("fragility index rises %d -> %s (no set of up to %d rows changes a conclusion)", ef.FragilityBefore, idx(0), fopt.MaxRemoved))
	case ef.FragilityBefore == 0 || ef.FragilityAfter < ef.FragilityBefore:
		parts = append(parts, fmt.Sprintf("fragility index falls %s -> %d", idx(ef.FragilityBefore), ef.FragilityAfter))
	case ef.FragilityAfter > ef.FragilityBefore:
		parts = append(parts, fmt.Sprintf("fragility index rises %d -> %d", ef.FragilityBefore, ef.FragilityAfter))
	default:
		parts = append(parts, fmt.Sprintf("fragility index stays %d", ef.FragilityBefore))
	}
	if ef.FragileBefore {
		switch {
		case ef.EndsFragility == 0:
			parts = append(parts, fmt.Sprintf("up to %d readings here do not end the fragility", opt.MaxReplicates))
		case ef.EndsFragility != sg.Replicates:
			if ef.EndsFragility == 1 {
				parts = append(parts, "1 reading here ends the fragility")
			} else {
				parts = append(parts, fmt.Sprintf("%d readings here end the fragility", ef.EndsFragility))
			}
		}
	}
	if len(parts) > 0 {
		b.WriteString(": ")
		b.WriteString(strings.Join(parts, "; "))
	}
	return b.String()
}

// sgNum formats v with sig significant digits.
func sgNum(v float64, sig int) string {
	if v == 0 {
		return "0"
	}
	return strconv.FormatFloat(v, 'g', sig, 64)
}
