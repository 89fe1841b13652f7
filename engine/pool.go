package engine

import (
	"errors"
	"fmt"
)

// Poolability of groups (ICH Q1E style).
//
// For a model with one group column g and one numeric predictor x (a
// stability study: assay against months over batches), three fits share
// the data and the weights:
//
//	separate  y ~ group(g) + x + group(g)*x    a line per level
//	common    y ~ group(g) + x                 one slope, own intercepts
//	pooled    y ~ x                            one line
//
// Slopes are tested first, F = ((RSS_common - RSS_separate)/(k-1)) /
// (RSS_separate/(n-2k)); when they are not significantly different at
// Alpha, the intercepts, F = ((RSS_pooled - RSS_common)/(k-1)) /
// (RSS_common/(n-k-1)); k is the number of levels. The verdict is
// PoolAll when neither test is significant, PoolSlopes when only the
// intercepts differ, PoolNone when the slopes differ. ICH Q1E tests both
// at 0.25, so that a difference is not pooled away for want of power
// (DefaultPoolAlpha). The verdict is a suggestion for qualified staff.

// DefaultPoolAlpha is the level of the poolability tests (ICH Q1E).
const DefaultPoolAlpha = 0.25

// Poolability verdicts.
const (
	PoolAll    = "pool all"       // one line for every level
	PoolSlopes = "common slope"   // one slope, an intercept per level
	PoolNone   = "separate lines" // the slopes differ
)

// ErrPoolShape: poolability needs a model with exactly one group column
// and one numeric predictor column.
var ErrPoolShape = errors.New("engine: poolability needs one group column and one numeric predictor")

// PoolTest is one F test of the poolability sequence.
type PoolTest struct {
	F        float64
	DF1, DF2 int
	P        float64
}

// Poolability is the result of Pool. Both tests are always computed;
// Intercepts decides the verdict only when the slopes do not differ.
type Poolability struct {
	Group, Predictor string
	Levels           int
	Alpha            float64
	Slopes           PoolTest
	Intercepts       PoolTest
	Verdict          string
}

// Pool runs the poolability tests for m's group column and numeric
// predictor on the data d (with m's weighting), at level alpha (0 means
// DefaultPoolAlpha). The terms of m only name the two columns; the three
// models are built here. Errors: ErrPoolShape when m does not have that
// shape, and the errors of Build and RefitWeighted (wrapped, naming the
// model that failed).
func Pool(m Model, d Data, alpha float64) (Poolability, error) {
	if alpha == 0 {
		alpha = DefaultPoolAlpha
	}
	groups := m.GroupColumns()
	var nums []string
	for _, c := range m.Columns() {
		if m.usesNumerically(c) {
			nums = append(nums, c)
		}
	}
	if len(groups) != 1 || len(nums) != 1 || groups[0] == nums[0] {
		return Poolability{}, fmt.Errorf("%w (the model uses groups %q and numbers %q)", ErrPoolShape, groups, nums)
	}
	g, x := quoteName(groups[0]), quoteName(nums[0])
	fit := func(name string, terms []string) (*Fit, error) {
		mm, err := NewModel(m.Response, terms, true)
		if err != nil {
			return nil, err
		}
		mm.Weight = m.Weight
		mm.Levels = m.Levels
		ds, err := mm.Build(d)
		if err != nil {
			return nil, fmt.Errorf("poolability, %s model: %w", name, err)
		}
		f, err := ds.Fit()
		if err != nil {
			return nil, fmt.Errorf("poolability, %s model: %w", name, err)
		}
		return f, nil
	}
	sep, err := fit("separate", []string{"group(" + g + ")", x, "group(" + g + ")*" + x})
	if err != nil {
		return Poolability{}, err
	}
	com, err := fit("common-slope", []string{"group(" + g + ")", x})
	if err != nil {
		return Poolability{}, err
	}
	k := len(sep.Model.Levels[groups[0]])
	res := Poolability{Group: groups[0], Predictor: nums[0], Levels: k, Alpha: alpha}
	pooled, err := fit("pooled", []string{x})
	if err != nil {
		return Poolability{}, err
	}
	res.Slopes = fTest(com, sep)
	res.Intercepts = fTest(pooled, com)
	switch {
	case res.Slopes.P < alpha:
		res.Verdict = PoolNone
	case res.Intercepts.P < alpha:
		res.Verdict = PoolSlopes
	default:
		res.Verdict = PoolAll
	}
	return res, nil
}

// fTest compares the nested fits small ⊂ big: F on (p_big - p_small,
// n - p_big) degrees of freedom with big's residual mean square.
func fTest(small, big *Fit) PoolTest {
	d1 := big.P - small.P
	d2 := big.DF
	ss := small.rss.addDD(big.rss.neg()).float()
	if ss < 0 {
		ss = 0
	}
	f := (ss / float64(d1)) / (big.RSS / float64(d2))
	return PoolTest{F: f, DF1: d1, DF2: d2, P: FSurvival(f, float64(d1), float64(d2))}
}
