package engine_test

// Reference values from R (Debian's r-base-core): lm, summary.lm, confint,
// residuals, hatvalues, rstandard, rstudent, cooks.distance, dffits,
// dfbetas and covratio on data sets shipped in R's datasets package
// (LifeCycleSavings from Belsley, Kuh & Welsch 1980; cars; stackloss;
// swiss; women; pressure; trees) and on three invented calibration-bench
// data sets. testdata/reference/gen_influence.R writes them and
// testdata/reference/regen.sh proves they are still what R says.

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumb/engine"
)

// Tolerance for every comparison with R: relative 1e-9, with an absolute
// floor for values near zero. A value is accepted when
//
//	|got - want| <= relTol * max(|want|, floorFrac * M)
//
// where M is the largest magnitude of that measure over the data set (for
// a per-observation measure: over all rows; for a coefficient quantity:
// over all coefficients). Values a thousand times smaller than the largest
// of their kind come out of the same arithmetic as the largest one and
// carry its rounding error, so they are held to 1e-12*M absolutely.
const (
	relTol    = 1e-9
	floorFrac = 1e-3
)

// rCase is one JSON file written by gen_influence.R. Undefined values are
// JSON null and decode as nil pointers.
type rCase struct {
	Source            string               `json:"source"`
	RVersion          string               `json:"r_version"`
	Dataset           string               `json:"dataset"`
	Formula           string               `json:"formula"`
	Response          string               `json:"response"`
	ResponseTransform string               `json:"response_transform"`
	Terms             []string             `json:"terms"`
	Intercept         bool                 `json:"intercept"`
	N                 int                  `json:"n"`
	P                 int                  `json:"p"`
	Labels            []string             `json:"labels"`
	Data              map[string][]float64 `json:"data"`
	Coefficients      []struct {
		Term     string   `json:"term"`
		Estimate *float64 `json:"estimate"`
		StdError *float64 `json:"std_error"`
		T        *float64 `json:"t"`
		P        *float64 `json:"p"`
		Lower95  *float64 `json:"lower_95"`
		Upper95  *float64 `json:"upper_95"`
	} `json:"coefficients"`
	Sigma       *float64           `json:"sigma"`
	DF          int                `json:"df"`
	RSquared    *float64           `json:"r_squared"`
	AdjRSquared *float64           `json:"adj_r_squared"`
	FStatistic  *float64           `json:"f_statistic"`
	FP          *float64           `json:"f_p"`
	VIF         map[string]float64 `json:"vif"`
	Residuals   []*float64         `json:"residuals"`
	Hat         []*float64         `json:"hat"`
	RStandard   []*float64         `json:"rstandard"`
	RStudent    []*float64         `json:"rstudent"`
	Cook        []*float64         `json:"cooks_distance"`
	DFFITS      []*float64         `json:"dffits"`
	DFBETAS     [][]*float64       `json:"dfbetas"`
	COVRATIO    []*float64         `json:"covratio"`
	OutlierP    []*float64         `json:"outlier_p"`
	BonferroniP []*float64         `json:"outlier_p_bonferroni"`

	// Weighted and grouped cases: text columns (group labels), the
	// weighting in plumb's notation with R's weights, and plumb's
	// coefficient names.
	TextData         map[string][]string `json:"text_data"`
	Weighting        string              `json:"weighting"`
	Weights          []float64           `json:"weights"`
	CoefficientNames []string            `json:"coefficient_names"`

	// Model-form checks (R anova, lmtest::dwtest and bptest).
	Form struct {
		LackOfFit *struct {
			Groups      int      `json:"groups"`
			PureErrorDF int      `json:"pure_error_df"`
			LackOfFitDF int      `json:"lack_of_fit_df"`
			F           *float64 `json:"f"`
			P           *float64 `json:"p"`
		} `json:"lack_of_fit"`
		DurbinWatson struct {
			Statistic *float64 `json:"statistic"`
			PExact    *float64 `json:"p_exact"`
			PNormal   *float64 `json:"p_normal"`
		} `json:"durbin_watson"`
		BreuschPagan struct {
			Statistic *float64 `json:"statistic"`
			DF        int      `json:"df"`
			P         *float64 `json:"p"`
		} `json:"breusch_pagan"`
		PRESS             *float64 `json:"press"`
		PredictedRSquared *float64 `json:"predicted_r_squared"`
	} `json:"form"`
}

func loadRCases(tb testing.TB) []rCase {
	tb.Helper()
	files, err := filepath.Glob(filepath.Join("..", "testdata", "reference", "*.json"))
	if err != nil {
		tb.Fatal(err)
	}
	if len(files) < 8 {
		tb.Fatalf("found %d reference files in ../testdata/reference, want at least 8 (run testdata/reference/regen.sh)", len(files))
	}
	var cases []rCase
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			tb.Fatal(err)
		}
		var c rCase
		if err := json.Unmarshal(b, &c); err != nil {
			tb.Fatalf("%s: %v", f, err)
		}
		if c.N == 0 || len(c.Hat) != c.N || len(c.DFBETAS) != c.N || len(c.Coefficients) != c.P {
			tb.Fatalf("%s: incomplete reference file (n=%d, %d hat values, %d dfbetas rows, p=%d, %d coefficients)",
				f, c.N, len(c.Hat), len(c.DFBETAS), c.P, len(c.Coefficients))
		}
		if !strings.HasPrefix(c.RVersion, "R version") || c.Source == "" || c.Formula == "" {
			tb.Fatalf("%s: header must name the source, the R version and the formula", f)
		}
		cases = append(cases, c)
	}
	return cases
}

// val turns R's JSON value into a float, with null as NaN.
func val(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

func maxAbs(want []float64) float64 {
	m := 0.0
	for _, w := range want {
		if a := math.Abs(w); a > m && !math.IsNaN(a) && !math.IsInf(a, 0) {
			m = a
		}
	}
	return m
}

// closeTo reports whether got matches want within the package tolerance
// given the measure's scale m. NaN matches only NaN (R's NA/NaN for an
// undefined value is null in the JSON).
func closeTo(got, want, m float64) bool {
	if math.IsNaN(want) || math.IsInf(want, 0) {
		return math.IsNaN(got) || math.IsInf(got, 0)
	}
	return math.Abs(got-want) <= relTol*math.Max(math.Abs(want), floorFrac*m)
}

// compareVec checks one measure over all observations (or coefficients).
func compareVec(t *testing.T, measure string, labels []string, got, want []float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Errorf("%s: got %d values, R has %d", measure, len(got), len(want))
		return
	}
	m := maxAbs(want)
	bad := 0
	for i := range want {
		if !closeTo(got[i], want[i], m) {
			bad++
			if bad <= 5 {
				rel := math.Abs(got[i]-want[i]) / math.Max(math.Abs(want[i]), floorFrac*m)
				t.Errorf("%s[%d %s] = %.17g, R gives %.17g (relative difference %.3g)",
					measure, i+1, label(labels, i), got[i], want[i], rel)
			}
		}
	}
	if bad > 5 {
		t.Errorf("%s: %d of %d values differ from R", measure, bad, len(want))
	}
}

func compareScalar(t *testing.T, name string, got, want float64) {
	t.Helper()
	if !closeTo(got, want, math.Abs(want)) {
		t.Errorf("%s = %.17g, R gives %.17g", name, got, want)
	}
}

func label(labels []string, i int) string {
	if i < len(labels) {
		return labels[i]
	}
	return ""
}

func vals(ps []*float64) []float64 {
	out := make([]float64, len(ps))
	for i, p := range ps {
		out[i] = val(p)
	}
	return out
}

// fitCase builds the model in plumb's term notation and fits it.
func fitCase(t *testing.T, c rCase) (*engine.Fit, *engine.Influence) {
	t.Helper()
	cols := make(map[string][]float64, len(c.Data))
	for k, v := range c.Data {
		cols[k] = v
	}
	if c.ResponseTransform == "log" {
		ly := make([]float64, len(c.Data[c.Response]))
		for i, v := range c.Data[c.Response] {
			ly[i] = math.Log(v)
		}
		cols[c.Response] = ly
	} else if c.ResponseTransform != "" {
		t.Fatalf("unknown response transform %q", c.ResponseTransform)
	}
	m, err := engine.NewModel(c.Response, c.Terms, c.Intercept)
	if err != nil {
		t.Fatalf("NewModel(%q, %q): %v", c.Response, c.Terms, err)
	}
	if m.Weight, err = engine.ParseWeighting(c.Weighting); err != nil {
		t.Fatalf("ParseWeighting(%q): %v", c.Weighting, err)
	}
	if c.TextData == nil && c.Weights == nil && !strings.Contains(strings.Join(c.Terms, " "), "group(") {
		// The plain route: Design and Refit.
		if m.P() != c.P {
			t.Fatalf("model has %d coefficients, R's has %d", m.P(), c.P)
		}
		X, y, err := m.Design(cols)
		if err != nil {
			t.Fatalf("Design: %v", err)
		}
		f, err := engine.Refit(m, X, y)
		if err != nil {
			t.Fatalf("Refit: %v", err)
		}
		return f, engine.Diagnose(f)
	}
	d, err := m.Build(engine.Data{Num: cols, Text: c.TextData})
	if err != nil {
		t.Fatalf("Build: %v", err)
	}
	if d.Model.P() != c.P {
		t.Fatalf("model has %d coefficients, R's has %d", d.Model.P(), c.P)
	}
	if len(d.W) != len(c.Weights) {
		t.Fatalf("Build gave %d weights, R fitted with %d", len(d.W), len(c.Weights))
	}
	for i := range d.W {
		if math.Abs(d.W[i]-c.Weights[i]) > 1e-15*c.Weights[i] {
			t.Fatalf("weight[%d] = %.17g, R's is %.17g", i, d.W[i], c.Weights[i])
		}
	}
	f, err := d.Fit()
	if err != nil {
		t.Fatalf("Fit: %v", err)
	}
	return f, engine.Diagnose(f)
}

// TestRReference compares the fit and every per-observation influence
// measure with R's values for each reference data set.
func TestRReference(t *testing.T) {
	for _, c := range loadRCases(t) {
		t.Run(c.Dataset, func(t *testing.T) {
			f, inf := fitCase(t, c)
			n, p := c.N, c.P
			if f.N != n || f.P != p || f.DF != c.DF {
				t.Fatalf("fit has n=%d p=%d df=%d, R has n=%d p=%d df=%d", f.N, f.P, f.DF, n, p, c.DF)
			}
			if len(inf.Rows) != n {
				t.Fatalf("Diagnose gave %d rows, want %d", len(inf.Rows), n)
			}

			// The fit summary.
			names := f.Model.Names()
			var est, se, tv, pv, lo, hi []float64
			var west, wse, wt, wp, wlo, whi []float64
			for j, rc := range c.Coefficients {
				if names[j] != rc.Term {
					t.Errorf("coefficient %d is named %q, R's is %q", j, names[j], rc.Term)
				}
				k := f.Coef[j]
				est, se, tv, pv = append(est, k.Estimate), append(se, k.StdError), append(tv, k.T), append(pv, k.P)
				lo, hi = append(lo, k.Lower95), append(hi, k.Upper95)
				west, wse, wt, wp = append(west, val(rc.Estimate)), append(wse, val(rc.StdError)), append(wt, val(rc.T)), append(wp, val(rc.P))
				wlo, whi = append(wlo, val(rc.Lower95)), append(whi, val(rc.Upper95))
			}
			compareVec(t, "estimate", names, est, west)
			compareVec(t, "std_error", names, se, wse)
			compareVec(t, "t", names, tv, wt)
			// p-values are compared each on its own scale: a p of 1e-30 is
			// a number in its own right, not a rounding residue of a p of 0.5.
			for j := range pv {
				compareScalar(t, "p["+names[j]+"]", pv[j], wp[j])
			}
			compareVec(t, "lower_95", names, lo, wlo)
			compareVec(t, "upper_95", names, hi, whi)
			compareScalar(t, "sigma", f.Sigma, val(c.Sigma))
			compareScalar(t, "r_squared", f.RSquared, val(c.RSquared))
			compareScalar(t, "adj_r_squared", f.AdjRSquared, val(c.AdjRSquared))
			if c.FStatistic != nil {
				compareScalar(t, "f_statistic", f.FStat, val(c.FStatistic))
				compareScalar(t, "f_p", f.FP, val(c.FP))
			}
			if c.VIF != nil {
				if len(f.VIF) != len(c.VIF) {
					t.Errorf("VIF has %d terms, R has %d", len(f.VIF), len(c.VIF))
				}
				for term, w := range c.VIF {
					g, ok := f.VIF[term]
					if !ok {
						t.Errorf("VIF has no entry for %q", term)
						continue
					}
					compareScalar(t, "vif["+term+"]", g, w)
				}
			}

			// Per-observation measures.
			get := func(fn func(o engine.Obs) float64) []float64 {
				out := make([]float64, n)
				for i, o := range inf.Rows {
					out[i] = fn(o)
				}
				return out
			}
			compareVec(t, "residual", c.Labels, get(func(o engine.Obs) float64 { return o.Residual }), vals(c.Residuals))
			compareVec(t, "leverage", c.Labels, get(func(o engine.Obs) float64 { return o.Leverage }), vals(c.Hat))
			compareVec(t, "studentized_internal", c.Labels, get(func(o engine.Obs) float64 { return o.StudentInternal }), vals(c.RStandard))
			compareVec(t, "studentized_external", c.Labels, get(func(o engine.Obs) float64 { return o.StudentExternal }), vals(c.RStudent))
			compareVec(t, "cooks_distance", c.Labels, get(func(o engine.Obs) float64 { return o.Cook }), vals(c.Cook))
			compareVec(t, "dffits", c.Labels, get(func(o engine.Obs) float64 { return o.DFFITS }), vals(c.DFFITS))
			compareVec(t, "covratio", c.Labels, get(func(o engine.Obs) float64 { return o.COVRATIO }), vals(c.COVRATIO))
			for j := 0; j < p; j++ {
				want := make([]float64, n)
				for i := range want {
					want[i] = val(c.DFBETAS[i][j])
				}
				got := make([]float64, n)
				for i := range got {
					got[i] = inf.DFBETASRow(i)[j]
				}
				compareVec(t, "dfbetas["+names[j]+"]", c.Labels, got, want)
			}
			// Outlier p-values, each on its own scale (see above).
			wop, wbp := vals(c.OutlierP), vals(c.BonferroniP)
			for i, o := range inf.Rows {
				compareScalar(t, "outlier_p["+label(c.Labels, i)+"]", o.OutlierP, wop[i])
				compareScalar(t, "outlier_p_bonferroni["+label(c.Labels, i)+"]", o.BonferroniP, wbp[i])
			}

			// Identity (Hoaglin & Welsch 1978): the leverages sum to p.
			sum := 0.0
			for _, o := range inf.Rows {
				sum += o.Leverage
			}
			if math.Abs(sum-float64(p)) > 1e-9*float64(p) {
				t.Errorf("sum of leverages = %.17g, want p = %d", sum, p)
			}
		})
	}
}

// TestRFormChecks compares the model-form checks with R: lack of fit with
// anova(fit, lm(y ~ factor(setting))), Durbin-Watson with
// lmtest::dwtest (statistic to 1e-9; the exact p within 1e-8 of Pan's
// algorithm, the normal-approximation p to 1e-9), studentized
// Breusch-Pagan with lmtest::bptest, PRESS and predicted R² from R's
// hatvalues (weighted versions for the weighted cases).
func TestRFormChecks(t *testing.T) {
	for _, c := range loadRCases(t) {
		t.Run(c.Dataset, func(t *testing.T) {
			f, inf := fitCase(t, c)
			fc := engine.CheckForm(f, inf)
			w := c.Form
			if (w.LackOfFit == nil) != (fc.LackOfFit == nil) {
				t.Fatalf("lack of fit: got %+v, R has %+v", fc.LackOfFit, w.LackOfFit)
			}
			if l := fc.LackOfFit; l != nil {
				if l.Groups != w.LackOfFit.Groups || l.PureErrorDF != w.LackOfFit.PureErrorDF || l.LackOfFitDF != w.LackOfFit.LackOfFitDF {
					t.Errorf("lack of fit: groups %d, df %d/%d; R: %d, %d/%d", l.Groups, l.LackOfFitDF, l.PureErrorDF,
						w.LackOfFit.Groups, w.LackOfFit.LackOfFitDF, w.LackOfFit.PureErrorDF)
				}
				compareScalar(t, "lack_of_fit.f", l.F, val(w.LackOfFit.F))
				compareScalar(t, "lack_of_fit.p", l.P, val(w.LackOfFit.P))
			}
			dw := fc.DurbinWatson
			compareScalar(t, "durbin_watson.statistic", dw.Statistic, val(w.DurbinWatson.Statistic))
			if dw.Method != engine.DWExact {
				t.Errorf("durbin_watson.method = %q for n = %d, want exact", dw.Method, f.N)
			}
			d := math.Abs(dw.P - val(w.DurbinWatson.PExact))
			t.Logf("durbin_watson.p = %.12g, R (Pan) %.12g, difference %.2g", dw.P, val(w.DurbinWatson.PExact), d)
			if !(d <= 1e-8) {
				t.Errorf("durbin_watson.p = %.10g, R (Pan, exact) %.10g: off by %.2g", dw.P, val(w.DurbinWatson.PExact), d)
			}
			compareScalar(t, "durbin_watson.p_normal", engine.DWNormalP(f, dw.Statistic), val(w.DurbinWatson.PNormal))
			bp := fc.BreuschPagan
			if bp == nil {
				t.Fatalf("breusch_pagan: nil, R has %+v", w.BreuschPagan)
			}
			if bp.DF != w.BreuschPagan.DF {
				t.Errorf("breusch_pagan.df = %d, R has %d", bp.DF, w.BreuschPagan.DF)
			}
			compareScalar(t, "breusch_pagan.statistic", bp.Statistic, val(w.BreuschPagan.Statistic))
			compareScalar(t, "breusch_pagan.p", bp.P, val(w.BreuschPagan.P))
			compareScalar(t, "press", fc.PRESS, val(w.PRESS))
			compareScalar(t, "predicted_r_squared", fc.PredictedRSquared, val(w.PredictedRSquared))
		})
	}
}
