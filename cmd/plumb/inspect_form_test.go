package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"
	"testing"
)

// formReference is the part of a testdata/reference file that the
// weighted, grouped and form checks use (gen_influence.R: R's lm with
// weights, factors with treatment contrasts, anova for lack of fit,
// lmtest::dwtest and lmtest::bptest).
type formReference struct {
	rReference
	Response  string               `json:"response"`
	Intercept bool                 `json:"intercept"`
	Weighting string               `json:"weighting"`
	Data      map[string][]float64 `json:"data"`
	TextData  map[string][]string  `json:"text_data"`
	Names     []string             `json:"coefficient_names"`
	Form      struct {
		LackOfFit *struct {
			Groups      int     `json:"groups"`
			PureErrorDF int     `json:"pure_error_df"`
			LackOfFitDF int     `json:"lack_of_fit_df"`
			F, P        float64 `json:"-"`
			FJ          float64 `json:"f"`
			PJ          float64 `json:"p"`
		} `json:"lack_of_fit"`
		DurbinWatson struct {
			Statistic float64 `json:"statistic"`
			PExact    float64 `json:"p_exact"`
		} `json:"durbin_watson"`
		BreuschPagan struct {
			Statistic float64 `json:"statistic"`
			DF        int     `json:"df"`
			P         float64 `json:"p"`
		} `json:"breusch_pagan"`
		PRESS             float64 `json:"press"`
		PredictedRSquared float64 `json:"predicted_r_squared"`
	} `json:"form"`
}

// inspectFormJSON is what inspect writes for the weights and the form.
type inspectFormJSON struct {
	inspectJSON
	Weights   *string `json:"weights"`
	LackOfFit *struct {
		Groups      int      `json:"groups"`
		PureErrorDF int      `json:"pure_error_df"`
		LackOfFitDF int      `json:"lack_of_fit_df"`
		F           *float64 `json:"f"`
		P           *float64 `json:"p"`
	} `json:"lack_of_fit"`
	DurbinWatson *struct {
		Statistic *float64 `json:"statistic"`
		P         *float64 `json:"p"`
		Method    string   `json:"method"`
	} `json:"durbin_watson"`
	BreuschPagan *struct {
		Statistic *float64 `json:"statistic"`
		DF        int      `json:"df"`
		P         *float64 `json:"p"`
	} `json:"breusch_pagan"`
	PRESS       *float64 `json:"press"`
	PredictedR2 *float64 `json:"predicted_r_squared"`
	Poolability *struct {
		Levels  int    `json:"levels"`
		Verdict string `json:"verdict"`
		Slopes  struct {
			F   *float64 `json:"f"`
			DF1 int      `json:"df1"`
			DF2 int      `json:"df2"`
			P   *float64 `json:"p"`
		} `json:"slopes"`
		Intercepts struct {
			F   *float64 `json:"f"`
			DF1 int      `json:"df1"`
			DF2 int      `json:"df2"`
			P   *float64 `json:"p"`
		} `json:"intercepts"`
	} `json:"poolability"`
}

// referenceCSV writes a reference set's data as a CSV file: the response,
// the other numeric columns, then the text columns, each in name order.
func referenceCSV(t *testing.T, ref formReference) string {
	t.Helper()
	var num, text []string
	for c := range ref.Data {
		if c != ref.Response {
			num = append(num, c)
		}
	}
	for c := range ref.TextData {
		text = append(text, c)
	}
	sort.Strings(num)
	sort.Strings(text)
	cols := append(append([]string{ref.Response}, num...), text...)
	var b strings.Builder
	b.WriteString(strings.Join(cols, ",") + "\n")
	for i := range ref.Data[ref.Response] {
		for j, c := range cols {
			if j > 0 {
				b.WriteByte(',')
			}
			if v, ok := ref.Data[c]; ok {
				b.WriteString(strconv.FormatFloat(v[i], 'g', -1, 64))
			} else {
				b.WriteString(`"` + ref.TextData[c][i] + `"`)
			}
		}
		b.WriteByte('\n')
	}
	path := filepath.Join(t.TempDir(), ref.Dataset+".csv")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

func readFormReference(t *testing.T, dataset string) formReference {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "reference", dataset+".json"))
	if err != nil {
		t.Fatal(err)
	}
	var r formReference
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &r.rReference); err != nil {
		t.Fatal(err)
	}
	return r
}

// TestInspectFormMatchesR runs inspect (CSV in, JSON out) on weighted,
// grouped and lack-of-fit reference sets and compares the fit, every
// row's measures (DFBETAS keyed by the coefficient names batch=B ...) and
// the checks of the model form with R's (source: testdata/reference,
// R's lm(weights = ) with treatment contrasts and influence.measures;
// anova(fit, lm(y ~ factor(setting))) for lack of fit; r-cran-lmtest's
// dwtest (exact p) and bptest; PRESS from R's hatvalues). pontius_* is
// the NIST/SEMATECH e-Handbook's load-cell calibration (§4.6.1, from
// memory), whose straight line fails the lack-of-fit test.
func TestInspectFormMatchesR(t *testing.T) {
	for _, dataset := range []string{
		"cars_weighted_inverse_speed", "ketterby_photometer_weighted", "co2_group_slopes",
		"ketterby_stability_batches", "ketterby_lots_no_intercept", "pontius_line", "pontius_quadratic",
	} {
		t.Run(dataset, func(t *testing.T) {
			ref := readFormReference(t, dataset)
			args := []string{"inspect", "--format", "json", referenceCSV(t, ref), "--response", ref.Response,
				"--terms", strings.Join(ref.Terms, ", ")}
			if !ref.Intercept {
				args = append(args, "--no-intercept")
			}
			if ref.Weighting != "" {
				args = append(args, "--weights", ref.Weighting)
			}
			out, stderr, code := runPlumb(t, "", args...)
			if code != 0 {
				t.Fatalf("exit code %d, stderr:\n%s", code, stderr)
			}
			var got inspectFormJSON
			if err := json.Unmarshal([]byte(out), &got); err != nil {
				t.Fatalf("output is not JSON: %v", err)
			}
			switch {
			case ref.Weighting == "" && got.Weights != nil:
				t.Errorf("unweighted fit says weights %q", *got.Weights)
			case ref.Weighting != "" && (got.Weights == nil || *got.Weights != ref.Weighting):
				t.Errorf("weights %v, want %q", got.Weights, ref.Weighting)
			}
			n := len(ref.Hat)
			if got.N != n || got.P != len(ref.Names) {
				t.Fatalf("n=%d p=%d; R has n=%d p=%d", got.N, got.P, n, len(ref.Names))
			}
			for j, c := range ref.Coefficients {
				g := got.Coefficients[j]
				if g.Term != ref.Names[j] || !near(g.Estimate, c.Estimate, math.Abs(c.Estimate)) || !near(g.StdError, c.StdError, c.StdError) {
					t.Errorf("coefficient %d: %q %v (se %v); R: %q %v (se %v)", j, g.Term, deref(g.Estimate), deref(g.StdError), ref.Names[j], c.Estimate, c.StdError)
				}
			}
			if !near(got.Sigma, ref.Sigma, ref.Sigma) {
				t.Errorf("sigma %v, R %v", deref(got.Sigma), ref.Sigma)
			}
			check := func(measure string, want []float64, get func(i int) *float64) {
				t.Helper()
				s := scaleOf(want)
				for i := range want {
					if g := get(i); !near(g, want[i], s) {
						t.Errorf("row %d %s = %v, R gives %.17g", i+1, measure, deref(g), want[i])
					}
				}
			}
			check("leverage", ref.Hat, func(i int) *float64 { return got.Rows[i].Leverage })
			check("studentized_internal", ref.RStandard, func(i int) *float64 { return got.Rows[i].StudentizedInternal })
			check("studentized_external", ref.RStudent, func(i int) *float64 { return got.Rows[i].StudentizedExternal })
			check("cooks_distance", ref.Cook, func(i int) *float64 { return got.Rows[i].Cook })
			check("dffits", ref.DFFITS, func(i int) *float64 { return got.Rows[i].DFFITS })
			check("covratio", ref.COVRATIO, func(i int) *float64 { return got.Rows[i].COVRATIO })
			for j, nm := range ref.Names {
				col := make([]float64, n)
				for i := range col {
					col[i] = ref.DFBETAS[i][j]
				}
				check("dfbetas["+nm+"]", col, func(i int) *float64 { return got.Rows[i].DFBETAS[nm] })
			}

			// The checks of the model form.
			rf := ref.Form
			if (rf.LackOfFit == nil) != (got.LackOfFit == nil) {
				t.Fatalf("lack_of_fit %v, R %v", got.LackOfFit, rf.LackOfFit)
			}
			if l := rf.LackOfFit; l != nil {
				g := got.LackOfFit
				if g.Groups != l.Groups || g.PureErrorDF != l.PureErrorDF || g.LackOfFitDF != l.LackOfFitDF ||
					!near(g.F, l.FJ, l.FJ) || !near(g.P, l.PJ, l.PJ) {
					t.Errorf("lack_of_fit %+v F %v p %v; R %+v", *g, deref(g.F), deref(g.P), *l)
				}
			}
			dw := got.DurbinWatson
			if dw == nil || !near(dw.Statistic, rf.DurbinWatson.Statistic, rf.DurbinWatson.Statistic) {
				t.Fatalf("durbin_watson %+v, R statistic %v", dw, rf.DurbinWatson.Statistic)
			}
			// The exact p (Imhof) agrees with lmtest's (Pan) within 1e-8
			// absolute (engine.DurbinWatson); n <= 100 here.
			if dw.P == nil || math.Abs(*dw.P-rf.DurbinWatson.PExact) > 1e-8 || dw.Method != "exact (Imhof)" {
				t.Errorf("durbin_watson p %v (%s), R exact %v", deref(dw.P), dw.Method, rf.DurbinWatson.PExact)
			}
			bp := got.BreuschPagan
			if bp == nil || bp.DF != rf.BreuschPagan.DF || !near(bp.Statistic, rf.BreuschPagan.Statistic, rf.BreuschPagan.Statistic) ||
				!near(bp.P, rf.BreuschPagan.P, rf.BreuschPagan.P) {
				t.Errorf("breusch_pagan %+v, R %+v", bp, rf.BreuschPagan)
			}
			if !near(got.PRESS, rf.PRESS, rf.PRESS) || !near(got.PredictedR2, rf.PredictedRSquared, 1) {
				t.Errorf("press %v predicted R² %v; R %v, %v", deref(got.PRESS), deref(got.PredictedR2), rf.PRESS, rf.PredictedRSquared)
			}
		})
	}
}

// TestInspectPoolMatchesR checks the poolability tests on the invented
// stability study against R's anova of the three nested weighted fits
// (testdata/reference/pool, gen_influence.R).
func TestInspectPoolMatchesR(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "reference", "pool", "ketterby_stability_batches.json"))
	if err != nil {
		t.Fatal(err)
	}
	type ftest struct {
		F   float64 `json:"f"`
		DF1 int     `json:"df1"`
		DF2 int     `json:"df2"`
		P   float64 `json:"p"`
	}
	var ref struct {
		Assay, Months, W   []float64
		Batch              []string
		Slopes, Intercepts ftest
	}
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatal(err)
	}
	var csv strings.Builder
	csv.WriteString("assay,months,batch,w\n")
	for i := range ref.Assay {
		csv.WriteString(strconv.FormatFloat(ref.Assay[i], 'g', -1, 64) + "," + strconv.FormatFloat(ref.Months[i], 'g', -1, 64) + "," +
			ref.Batch[i] + "," + strconv.FormatFloat(ref.W[i], 'g', -1, 64) + "\n")
	}
	out, stderr, code := runPlumb(t, csv.String(), "inspect", "-", "--format", "json", "--response", "assay",
		"--terms", "group(batch), months, group(batch)*months", "--weights", "w")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var got inspectFormJSON
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatal(err)
	}
	p := got.Poolability
	if p == nil {
		t.Fatal("no poolability in the JSON")
	}
	for _, c := range []struct {
		name string
		g    struct {
			F   *float64 `json:"f"`
			DF1 int      `json:"df1"`
			DF2 int      `json:"df2"`
			P   *float64 `json:"p"`
		}
		want ftest
	}{{"slopes", p.Slopes, ref.Slopes}, {"intercepts", p.Intercepts, ref.Intercepts}} {
		if c.g.DF1 != c.want.DF1 || c.g.DF2 != c.want.DF2 || !near(c.g.F, c.want.F, c.want.F) || !near(c.g.P, c.want.P, c.want.P) {
			t.Errorf("%s: F %v (%d, %d) p %v; R %+v", c.name, deref(c.g.F), c.g.DF1, c.g.DF2, deref(c.g.P), c.want)
		}
	}
	levels := slices.Compact(slices.Sorted(slices.Values(ref.Batch)))
	if p.Levels != len(levels) {
		t.Errorf("levels %d, want %d", p.Levels, len(levels))
	}
}

// TestInspectBadWeights: a zero, negative or non-finite weight leaves its
// row out with file:line:column (the weight's field), never a crash;
// --strict refuses the file; a bad --weights is a usage error.
func TestInspectBadWeights(t *testing.T) {
	const csv = "y,x,w\n1,1,1\n2,2,0\n3,3.1,1\n4,4,-2\n5,5.2,1\n6,6,1\n7,7.1,2\n8,8,1e400\n"
	out, stderr, code := runPlumb(t, csv, "inspect", "-", "--response", "y", "--terms", "x", "--weights", "w", "--format", "json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var got struct {
		N        int `json:"n"`
		Rejected []struct {
			Line, Column int
			Field        string
			Reason       string
		} `json:"rejected"`
	}
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatal(err)
	}
	want := []string{"3:5:w", "5:5:w", "9:5:w"}
	var where []string
	for _, r := range got.Rejected {
		where = append(where, strconv.Itoa(r.Line)+":"+strconv.Itoa(r.Column)+":"+r.Field)
	}
	if got.N != 5 || !slices.Equal(where, want) {
		t.Fatalf("n %d, rejected at %v (%+v); want 5 rows, %v", got.N, where, got.Rejected, want)
	}
	// 1e400 is refused by the decoder as not finite; 0 and -2 as weights.
	if !strings.Contains(got.Rejected[0].Reason, "weight 0") || !strings.Contains(got.Rejected[1].Reason, "weight -2") {
		t.Errorf("reasons %+v", got.Rejected)
	}
	_, stderr, code = runPlumb(t, csv, "inspect", "-", "--response", "y", "--terms", "x", "--weights", "w", "--strict")
	if code != 1 || !strings.Contains(stderr, "stdin:3:5") {
		t.Errorf("--strict: exit %d, stderr %s", code, stderr)
	}
	for _, bad := range []string{"inverse(x", "inverse(x^0)", "inverse()", "1w"} {
		_, stderr, code = runPlumb(t, csv, "inspect", "-", "--response", "y", "--terms", "x", "--weights", bad)
		if code != 2 || !strings.Contains(stderr, "--weights") {
			t.Errorf("--weights %q: exit %d, stderr %s", bad, code, stderr)
		}
	}
	_, stderr, code = runPlumb(t, csv, "inspect", "-", "--response", "y", "--terms", "x", "--weights", "v")
	if code != 1 || !strings.Contains(stderr, `"v"`) {
		t.Errorf("unknown weight column: exit %d, stderr %s", code, stderr)
	}
}

// TestInspectTextColumn: a text column used as a plain term is refused
// with a suggestion of group(...); as group(...) it fits, and a group
// with one level is reported as constant.
func TestInspectTextColumn(t *testing.T) {
	const csv = "y,x,lot\n1,1,A\n2.1,2,B\n2.9,3,A\n4.2,4,B\n5,5,A\n5.8,6,B\n"
	_, stderr, code := runPlumb(t, csv, "inspect", "-", "--response", "y", "--terms", "x, lot")
	if code != 1 || !strings.Contains(stderr, "group(lot)") {
		t.Errorf("text as a number: exit %d, stderr %s", code, stderr)
	}
	out, stderr, code := runPlumb(t, csv, "inspect", "-", "--response", "y", "--terms", "x, group(lot)", "--format", "json")
	if code != 0 || !strings.Contains(out, `"lot=B"`) {
		t.Errorf("group(lot): exit %d, stderr %s", code, stderr)
	}
	one := "y,x,lot\n1,1,A\n2.1,2,A\n2.9,3,A\n4.2,4,A\n5,5,A\n"
	_, stderr, code = runPlumb(t, one, "inspect", "-", "--response", "y", "--terms", "x, group(lot)")
	if code != 1 || !strings.Contains(stderr, "single level") {
		t.Errorf("one level: exit %d, stderr %s", code, stderr)
	}
}

// TestInspectFormWords: with --format csv the checks go to standard
// error in words, judged at --form-level; a bad level is a usage error.
func TestInspectFormWords(t *testing.T) {
	args := []string{"inspect", fixture("co2.csv"), "--response", "uptake", "--terms", "group(treatment), conc, group(treatment)*conc", "--format", "csv"}
	_, stderr, code := runPlumb(t, "", append(args, "--form-level", "0.01")...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	for _, want := range []string{"form: lack of fit: statistic 2.851 on 10, 70 df, p 0.00493", "adding a term",
		"form: Durbin-Watson: statistic 0.5417, p < 1e-8",                 // exact p, below its accuracy
		"form: Breusch-Pagan: statistic 10.58 on 3 df, p 0.0142: no sign", // not significant at 0.01
		"form: poolability of treatment (2 levels) at 0.25", "common slope"} {
		if !strings.Contains(stderr, want) {
			t.Errorf("stderr lacks %q:\n%s", want, stderr)
		}
	}
	if _, stderr, code := runPlumb(t, "", append(args, "--form-level", "1")...); code != 2 || !strings.Contains(stderr, "--form-level") {
		t.Errorf("--form-level 1: exit %d, %s", code, stderr)
	}
}
