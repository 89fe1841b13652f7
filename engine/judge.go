package engine

import (
	"fmt"
	"math"
	"sort"
	"sync"
)

// Family selects which cutoff family decides "influential".
type Family int

const (
	// Absolute cutoffs: Cook's D > median of F(p, n-p) (or 1),
	// |DFFITS| > 1, |DFBETAS| > 1.
	Absolute Family = iota
	// SizeAdjusted cutoffs: Cook's D > 4/n, |DFFITS| > 2√(p/n),
	// |DFBETAS| > 2/√n, h > 2p/n, |COVRATIO-1| > 3p/n.
	SizeAdjusted
)

// CookRule selects the absolute Cook's distance cutoff.
type CookRule int

const (
	// CookFMedian: D > F(0.5; p, n-p), the median of the F distribution.
	CookFMedian CookRule = iota
	// CookOne: D > 1.
	CookOne
)

// OutlierTest selects how an outlier is called.
type OutlierTest int

const (
	// BonferroniTest: Bonferroni-adjusted p of the externally studentized
	// residual below Alpha.
	BonferroniTest OutlierTest = iota
	// GrubbsTest: the two-sided Grubbs test on the residuals at level
	// Alpha flags the row with the largest |residual - mean|.
	GrubbsTest
)

// Cutoffs configures Judge. The zero value is not useful; start from
// DefaultCutoffs.
type Cutoffs struct {
	Family Family
	Cook   CookRule
	Alpha  float64
	Test   OutlierTest
}

// DefaultCutoffs: absolute family decides, Cook's cutoff the F median,
// Bonferroni outlier test at alpha 0.05.
func DefaultCutoffs() Cutoffs {
	return Cutoffs{Family: Absolute, Cook: CookFMedian, Alpha: 0.05, Test: BonferroniTest}
}

// Measure, family and word names used in flags and verdicts.
const (
	MeasureLeverage   = "leverage"
	MeasureCook       = "cooks_distance"
	MeasureDFFITS     = "dffits"
	MeasureDFBETAS    = "dfbetas"
	MeasureCOVRATIO   = "covratio"
	MeasureBonferroni = "outlier_p_bonferroni"
	MeasureGrubbs     = "grubbs"

	FamilyAbsolute     = "absolute"
	FamilySizeAdjusted = "size_adjusted"
	FamilyTest         = "test"
)

// Flag records one crossed cutoff: the measure, its family, the term (for
// dfbetas), the value and the cutoff. For covratio Value is COVRATIO and
// Cutoff is 3p/n, crossed when |COVRATIO-1| > Cutoff. For the tests Value
// is the p-value (crossed when below Cutoff = alpha) or Grubbs' G
// (crossed when above the critical value).
type Flag struct {
	Measure string
	Family  string
	Term    string
	Value   float64
	Cutoff  float64
}

// Verdict is the judgement of one row. Outlier: the outlier test fired.
// Influential: a cutoff of the deciding family was crossed. Notable: not
// influential, but a cutoff of the other family was crossed. Flags lists
// every crossed cutoff of both families and the test.
type Verdict struct {
	Outlier     bool
	Influential bool
	Notable     bool
	Flags       []Flag
}

// Word is the one-word summary of a verdict. Its text is what plumb
// writes and stores; compare with the constants, never with literals.
type Word string

// The verdict words.
const (
	WordOrdinary    Word = "ordinary"
	WordNotable     Word = "notable"
	WordOutlier     Word = "outlier"
	WordInfluential Word = "influential"
	// WordSuspect: outlier and influential.
	WordSuspect Word = "suspect"
)

// Words lists the verdict words in Rank order, the most urgent first.
var Words = []Word{WordSuspect, WordOutlier, WordInfluential, WordNotable, WordOrdinary}

// Rank orders the words for listing, most urgent first: suspect 4,
// outlier 3, influential 2, notable 1, ordinary and anything else (the
// empty word of a row never judged) 0.
func (w Word) Rank() int {
	switch w {
	case WordSuspect:
		return 4
	case WordOutlier:
		return 3
	case WordInfluential:
		return 2
	case WordNotable:
		return 1
	}
	return 0
}

// Word summarises the verdict: WordSuspect (outlier and influential),
// WordInfluential, WordOutlier, WordNotable or WordOrdinary.
func (v Verdict) Word() Word {
	switch {
	case v.Outlier && v.Influential:
		return WordSuspect
	case v.Influential:
		return WordInfluential
	case v.Outlier:
		return WordOutlier
	case v.Notable:
		return WordNotable
	}
	return WordOrdinary
}

// Limits are the numeric cutoffs Judge applies to a fit of n rows and p
// coefficients.
type Limits struct {
	CookAbsolute, DFFITSAbsolute, DFBETASAbsolute float64
	CookSize, DFFITSSize, DFBETASSize             float64
	Leverage, COVRATIO                            float64
}

// fMedianFloor is a lower bound of the median of F(d1, d2) over all
// d1, d2 >= 1: the smallest median is the limit d1 = 1, d2 -> inf, the
// median of chi-squared(1), 0.4549 (checked over a grid in the tests).
const fMedianFloor = 0.45

func anyCookAbove(rows []Obs, v float64) bool {
	for i := range rows {
		if rows[i].Cook > v {
			return true
		}
	}
	return false
}

// CutoffLimits returns the numeric cutoffs for n rows and p coefficients.
func CutoffLimits(c Cutoffs, n, p int) Limits {
	fn, fp := float64(n), float64(p)
	l := Limits{
		CookAbsolute: 1, DFFITSAbsolute: 1, DFBETASAbsolute: 1,
		CookSize: 4 / fn, DFFITSSize: 2 * math.Sqrt(fp/fn), DFBETASSize: 2 / math.Sqrt(fn),
		Leverage: 2 * fp / fn, COVRATIO: 3 * fp / fn,
	}
	if c.Cook == CookFMedian && n > p {
		l.CookAbsolute = FQuantile(0.5, fp, fn-fp)
	}
	return l
}

// Judge applies the cutoffs to every row of inf and returns one verdict per
// row. Both families are always evaluated and reported; c.Family decides
// which one makes a row influential. NaN measures cross no cutoff. An
// Influence built by hand may leave DFBETAS nil: then no DFBETAS cutoff is
// applied; otherwise it must hold P values per row.
func Judge(inf *Influence, c Cutoffs) []Verdict {
	f := inf.Fit
	p := f.P
	if inf.DFBETAS != nil && len(inf.DFBETAS) != len(inf.Rows)*p {
		panic(fmt.Sprintf("engine: Judge: %d DFBETAS for %d rows of %d coefficients", len(inf.DFBETAS), len(inf.Rows), p))
	}
	j := newJudge(f, c, inf.Rows)
	out := make([]Verdict, len(inf.Rows))
	ch := newChunking(len(inf.Rows), p)
	ch.run(func(k int) {
		lo, hi := ch.bounds(k)
		j.chunk(inf, out, lo, hi)
	})
	return out
}

// newJudge prepares the cutoffs for f. With rows given and the F-median
// rule, a table in which no Cook's distance reaches fMedianFloor skips the
// F quantile: no row can cross the cutoff, which is never below the
// floor (the quantile's inverse incomplete beta dominates the cost of
// judging one arriving row).
func newJudge(f *Fit, c Cutoffs, rows []Obs) *judge {
	j := &judge{}
	j.init(c, f.N, f.P, f.Model.Names(), rows)
	if c.Test == GrubbsTest {
		j.gr = Grubbs(f.WeightedResiduals(), c.Alpha)
		if j.gr.Outlier {
			j.grubbsRow = j.gr.Index
		}
	}
	return j
}

// init sets the cutoffs for a fit of n rows and p coefficients named
// names, skipping the F quantile as newJudge says when rows are given.
func (j *judge) init(c Cutoffs, n, p int, names []string, rows []Obs) {
	var lim Limits
	if c.Cook == CookFMedian && rows != nil && !anyCookAbove(rows, fMedianFloor) {
		c1 := c
		c1.Cook = CookOne
		lim = CutoffLimits(c1, n, p)
		lim.CookAbsolute = fMedianFloor
	} else {
		lim = CutoffLimits(c, n, p)
	}
	*j = judge{lim: lim, names: names, c: c, grubbsRow: -1, p: p}
	j.minCook = math.Min(j.lim.CookAbsolute, j.lim.CookSize)
	j.minDFFITS = math.Min(j.lim.DFFITSAbsolute, j.lim.DFFITSSize)
	j.minDFBETAS = math.Min(j.lim.DFBETASAbsolute, j.lim.DFBETASSize)
}

// chunk judges rows [lo, hi) of inf into out.
func (j *judge) chunk(inf *Influence, out []Verdict, lo, hi int) {
	cf := j.begin(lo, hi)
	cf.rows(inf, out, lo, hi)
	cf.end(out)
}

// chunkFlags collects the flags of one chunk of rows: in a reused scratch
// buffer first, then (end) in one exactly sized backing array that the
// rows' verdicts take subslices of.
type chunkFlags struct {
	j      *judge
	sp     *[]Flag
	buf    []Flag
	ends   []int32
	lo, hi int
}

// begin starts judging the chunk [lo, hi).
func (j *judge) begin(lo, hi int) chunkFlags {
	sp := flagScratch.Get().(*[]Flag)
	return chunkFlags{j: j, sp: sp, buf: (*sp)[:0], ends: make([]int32, hi-lo), lo: lo, hi: hi}
}

// rows judges rows [lo, hi) of the chunk, in order after those before.
func (cf *chunkFlags) rows(inf *Influence, out []Verdict, lo, hi int) {
	p := cf.j.p
	var dfb []float64
	for i := lo; i < hi; i++ {
		if inf.DFBETAS != nil {
			dfb = inf.DFBETAS[i*p : (i+1)*p]
		}
		cf.buf = cf.j.row(cf.buf, i, &inf.Rows[i], dfb, &out[i])
		cf.ends[i-cf.lo] = int32(len(cf.buf))
	}
}

// end hands the chunk's flags to its verdicts and returns the scratch.
func (cf *chunkFlags) end(out []Verdict) {
	buf := cf.buf
	if len(buf) > 0 {
		flags := make([]Flag, len(buf))
		copy(flags, buf)
		start := 0
		for i := cf.lo; i < cf.hi; i++ {
			end := int(cf.ends[i-cf.lo])
			if end > start {
				out[i].Flags = flags[start:end:end]
			}
			start = end
		}
	}
	clear(buf)
	*cf.sp = buf
	flagScratch.Put(cf.sp)
}

// one judges row i alone, with flags of its own.
func (j *judge) one(inf *Influence, out []Verdict, i int) {
	out[i] = Verdict{}
	if fl := j.row(nil, i, &inf.Rows[i], inf.DFBETASRow(i), &out[i]); len(fl) > 0 {
		out[i].Flags = fl[:len(fl):len(fl)]
	}
}

// flagScratch holds the per-chunk scratch buffers of Judge.
var flagScratch = sync.Pool{New: func() any { b := make([]Flag, 0, 1024); return &b }}

type judge struct {
	lim                            Limits
	minCook, minDFFITS, minDFBETAS float64
	names                          []string
	c                              Cutoffs
	gr                             GrubbsResult
	grubbsRow                      int
	p                              int
}

// row appends the flags of one row to dst and sets the verdict's booleans.
func (j *judge) row(dst []Flag, i int, o *Obs, dfb []float64, v *Verdict) []Flag {
	lim := &j.lim
	// Fast path: below the smaller cutoff of every measure, no flag.
	if o.Cook <= j.minCook && math.Abs(o.DFFITS) <= j.minDFFITS && o.Leverage <= lim.Leverage &&
		math.Abs(o.COVRATIO-1) <= lim.COVRATIO && i != j.grubbsRow &&
		(j.c.Test != BonferroniTest || !(o.BonferroniP < j.c.Alpha)) {
		quiet := true
		for _, d := range dfb {
			if math.Abs(d) > j.minDFBETAS {
				quiet = false
				break
			}
		}
		if quiet {
			*v = Verdict{}
			return dst
		}
	}
	abs, size := false, false
	if o.Cook > lim.CookAbsolute {
		dst = append(dst, Flag{MeasureCook, FamilyAbsolute, "", o.Cook, lim.CookAbsolute})
		abs = true
	}
	if math.Abs(o.DFFITS) > lim.DFFITSAbsolute {
		dst = append(dst, Flag{MeasureDFFITS, FamilyAbsolute, "", o.DFFITS, lim.DFFITSAbsolute})
		abs = true
	}
	for k, d := range dfb {
		if math.Abs(d) > lim.DFBETASAbsolute {
			dst = append(dst, Flag{MeasureDFBETAS, FamilyAbsolute, j.names[k], d, lim.DFBETASAbsolute})
			abs = true
		}
	}
	if o.Leverage > lim.Leverage {
		dst = append(dst, Flag{MeasureLeverage, FamilySizeAdjusted, "", o.Leverage, lim.Leverage})
		size = true
	}
	if o.Cook > lim.CookSize {
		dst = append(dst, Flag{MeasureCook, FamilySizeAdjusted, "", o.Cook, lim.CookSize})
		size = true
	}
	if math.Abs(o.DFFITS) > lim.DFFITSSize {
		dst = append(dst, Flag{MeasureDFFITS, FamilySizeAdjusted, "", o.DFFITS, lim.DFFITSSize})
		size = true
	}
	for k, d := range dfb {
		if math.Abs(d) > lim.DFBETASSize {
			dst = append(dst, Flag{MeasureDFBETAS, FamilySizeAdjusted, j.names[k], d, lim.DFBETASSize})
			size = true
		}
	}
	if math.Abs(o.COVRATIO-1) > lim.COVRATIO {
		dst = append(dst, Flag{MeasureCOVRATIO, FamilySizeAdjusted, "", o.COVRATIO, lim.COVRATIO})
		size = true
	}
	v.Outlier = false
	switch j.c.Test {
	case BonferroniTest:
		if o.BonferroniP < j.c.Alpha {
			dst = append(dst, Flag{MeasureBonferroni, FamilyTest, "", o.BonferroniP, j.c.Alpha})
			v.Outlier = true
		}
	case GrubbsTest:
		if i == j.grubbsRow {
			dst = append(dst, Flag{MeasureGrubbs, FamilyTest, "", j.gr.G, j.gr.Critical})
			v.Outlier = true
		}
	}
	if j.c.Family == SizeAdjusted {
		abs, size = size, abs
	}
	v.Influential = abs
	v.Notable = !abs && size
	return dst
}

// Flagged returns the indices of the verdicts whose Word is one of words,
// sorted.
func Flagged(vs []Verdict, words ...Word) []int {
	want := make(map[Word]bool, len(words))
	for _, w := range words {
		want[w] = true
	}
	var idx []int
	for i, v := range vs {
		if want[v.Word()] {
			idx = append(idx, i)
		}
	}
	sort.Ints(idx)
	return idx
}
