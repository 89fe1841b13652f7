package engine

import (
	"math"
	"sort"
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

// Word summarises the verdict: "suspect" (outlier and influential),
// "influential", "outlier", "notable" or "ordinary".
func (v Verdict) Word() string {
	switch {
	case v.Outlier && v.Influential:
		return "suspect"
	case v.Influential:
		return "influential"
	case v.Outlier:
		return "outlier"
	case v.Notable:
		return "notable"
	}
	return "ordinary"
}

// Limits are the numeric cutoffs Judge applies to a fit of n rows and p
// coefficients.
type Limits struct {
	CookAbsolute, DFFITSAbsolute, DFBETASAbsolute float64
	CookSize, DFFITSSize, DFBETASSize             float64
	Leverage, COVRATIO                            float64
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
// which one makes a row influential. NaN measures cross no cutoff.
func Judge(inf *Influence, c Cutoffs) []Verdict {
	f := inf.Fit
	n, p := f.N, f.P
	lim := CutoffLimits(c, n, p)
	names := f.Model.Names()
	alpha := c.Alpha
	out := make([]Verdict, len(inf.Rows))
	grubbsRow := -1
	var gr GrubbsResult
	if c.Test == GrubbsTest {
		gr = Grubbs(f.Residuals, alpha)
		if gr.Outlier {
			grubbsRow = gr.Index
		}
	}
	var all []Flag
	start := make([]int, len(inf.Rows)+1)
	for i := range inf.Rows {
		o := &inf.Rows[i]
		start[i] = len(all)
		v := &out[i]
		abs, size := false, false
		add := func(meas, fam, term string, val, cut float64) {
			all = append(all, Flag{Measure: meas, Family: fam, Term: term, Value: val, Cutoff: cut})
			switch fam {
			case FamilyAbsolute:
				abs = true
			case FamilySizeAdjusted:
				size = true
			}
		}
		if o.Cook > lim.CookAbsolute {
			add(MeasureCook, FamilyAbsolute, "", o.Cook, lim.CookAbsolute)
		}
		if math.Abs(o.DFFITS) > lim.DFFITSAbsolute {
			add(MeasureDFFITS, FamilyAbsolute, "", o.DFFITS, lim.DFFITSAbsolute)
		}
		for j, d := range o.DFBETAS {
			if math.Abs(d) > lim.DFBETASAbsolute {
				add(MeasureDFBETAS, FamilyAbsolute, names[j], d, lim.DFBETASAbsolute)
			}
		}
		if o.Leverage > lim.Leverage {
			add(MeasureLeverage, FamilySizeAdjusted, "", o.Leverage, lim.Leverage)
		}
		if o.Cook > lim.CookSize {
			add(MeasureCook, FamilySizeAdjusted, "", o.Cook, lim.CookSize)
		}
		if math.Abs(o.DFFITS) > lim.DFFITSSize {
			add(MeasureDFFITS, FamilySizeAdjusted, "", o.DFFITS, lim.DFFITSSize)
		}
		for j, d := range o.DFBETAS {
			if math.Abs(d) > lim.DFBETASSize {
				add(MeasureDFBETAS, FamilySizeAdjusted, names[j], d, lim.DFBETASSize)
			}
		}
		if math.Abs(o.COVRATIO-1) > lim.COVRATIO {
			add(MeasureCOVRATIO, FamilySizeAdjusted, "", o.COVRATIO, lim.COVRATIO)
		}
		switch c.Test {
		case BonferroniTest:
			if o.BonferroniP < alpha {
				add(MeasureBonferroni, FamilyTest, "", o.BonferroniP, alpha)
				v.Outlier = true
			}
		case GrubbsTest:
			if i == grubbsRow {
				add(MeasureGrubbs, FamilyTest, "", gr.G, gr.Critical)
				v.Outlier = true
			}
		}
		if c.Family == SizeAdjusted {
			abs, size = size, abs
		}
		v.Influential = abs
		v.Notable = !abs && size
	}
	start[len(inf.Rows)] = len(all)
	for i := range out {
		if start[i+1] > start[i] {
			out[i].Flags = all[start[i]:start[i+1]:start[i+1]]
		}
	}
	return out
}

// Flagged returns the indices of the verdicts whose Word is one of words
// ("suspect", "influential", "outlier", "notable", "ordinary"), sorted.
func Flagged(vs []Verdict, words ...string) []int {
	want := make(map[string]bool, len(words))
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
