package main

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"plumb/engine"
)

// inspectJSON is the part of the JSON report the tests read.
type inspectJSON struct {
	N            int      `json:"n"`
	P            int      `json:"p"`
	RowsInFile   int      `json:"rows_in_file"`
	Sigma        *float64 `json:"sigma"`
	RSquared     *float64 `json:"r_squared"`
	Coefficients []struct {
		Term     string   `json:"term"`
		Estimate *float64 `json:"estimate"`
		StdError *float64 `json:"std_error"`
		T        *float64 `json:"t"`
		P        *float64 `json:"p"`
		Lower95  *float64 `json:"lower_95"`
		Upper95  *float64 `json:"upper_95"`
	} `json:"coefficients"`
	VIF  map[string]float64 `json:"vif"`
	Rows []struct {
		Row                 int                 `json:"row"`
		ID                  *string             `json:"id"`
		Line                int                 `json:"line"`
		Fitted              *float64            `json:"fitted"`
		Leverage            *float64            `json:"leverage"`
		Residual            *float64            `json:"residual"`
		StudentizedInternal *float64            `json:"studentized_internal"`
		StudentizedExternal *float64            `json:"studentized_external"`
		Cook                *float64            `json:"cooks_distance"`
		DFFITS              *float64            `json:"dffits"`
		DFBETAS             map[string]*float64 `json:"dfbetas"`
		COVRATIO            *float64            `json:"covratio"`
		OutlierPBonferroni  *float64            `json:"outlier_p_bonferroni"`
		Outlier             *bool               `json:"outlier"`
		Influential         *bool               `json:"influential"`
		Flags               []struct {
			Measure string   `json:"measure"`
			Family  string   `json:"family"`
			Value   *float64 `json:"value"`
			Cutoff  *float64 `json:"cutoff"`
			Term    *string  `json:"term"`
		} `json:"flags"`
	} `json:"rows"`
	Rejected []struct {
		File    string `json:"file"`
		Row     int    `json:"row"`
		Line    int    `json:"line"`
		Column  int    `json:"column"`
		Field   string `json:"field"`
		FieldNo int    `json:"field_number"`
		ID      string `json:"id"`
		Reason  string `json:"reason"`
	} `json:"rejected"`
	Missing  int    `json:"missing"`
	Filtered *int   `json:"filtered"`
	IDColumn string `json:"id_column"`
}

// rReference is the part of a testdata/reference file (written by
// testdata/reference/gen_influence.R with R's lm and influence functions)
// that the end-to-end check uses.
type rReference struct {
	Dataset      string   `json:"dataset"`
	Terms        []string `json:"terms"`
	Coefficients []struct {
		Term     string  `json:"term"`
		Estimate float64 `json:"estimate"`
		StdError float64 `json:"std_error"`
	} `json:"coefficients"`
	Sigma     float64     `json:"sigma"`
	RSquared  float64     `json:"r_squared"`
	Hat       []float64   `json:"hat"`
	RStandard []float64   `json:"rstandard"`
	RStudent  []float64   `json:"rstudent"`
	Cook      []float64   `json:"cooks_distance"`
	DFFITS    []float64   `json:"dffits"`
	DFBETAS   [][]float64 `json:"dfbetas"`
	COVRATIO  []float64   `json:"covratio"`
	Bonf      []float64   `json:"outlier_p_bonferroni"`
}

func readRReference(tb testing.TB, dataset string) rReference {
	tb.Helper()
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "reference", dataset+".json"))
	if err != nil {
		tb.Fatal(err)
	}
	var r rReference
	if err := json.Unmarshal(b, &r); err != nil {
		tb.Fatal(err)
	}
	return r
}

// near compares with R at 1e-9 relative, with an absolute floor of 1e-12
// times the measure's largest magnitude (as in engine/rgolden_test.go).
func near(got *float64, want, scale float64) bool {
	if got == nil {
		return false
	}
	return math.Abs(*got-want) <= 1e-9*math.Max(math.Abs(want), 1e-3*scale)
}

func scaleOf(v []float64) float64 {
	m := 0.0
	for _, x := range v {
		m = math.Max(m, math.Abs(x))
	}
	return m
}

// TestInspectMatchesR runs the whole command (CSV in, JSON out) on files
// holding the data of four reference sets and compares each row's
// measures with R's (source: testdata/reference, R's lm, hatvalues,
// rstandard, rstudent, cooks.distance, dffits, dfbetas, covratio).
// thermo.csv also holds two unreadable rows, which must be left out so
// that the remaining 30 rows reproduce R's fit on the same 30 rows.
func TestInspectMatchesR(t *testing.T) {
	tests := []struct {
		name    string
		dataset string
		args    []string
		skipped int
	}{
		{"thermocouple with bad rows", "ketterby_thermocouple",
			[]string{fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms}, 2},
		{"quoted names with spaces, CRLF", "ketterby_flowmeter",
			[]string{fixture("flow.csv"), "--response", "flow rate (l/min)",
				"--terms", `"pressure drop (kPa)", "fluid temp", "pressure drop (kPa)"*"fluid temp"`}, 0},
		{"dotted names", "stackloss",
			[]string{fixture("stackloss.csv"), "--response", "stack.loss", "--terms", "Air.Flow, Water.Temp, Acid.Conc."}, 0},
		{"no intercept", "cars_quadratic_no_intercept",
			[]string{fixture("cars.csv"), "--response", "dist", "--terms", "speed, speed^2", "--no-intercept"}, 0},
		{"response quoted like a term", "ketterby_flowmeter",
			[]string{fixture("flow.csv"), "--response", `"flow rate (l/min)"`,
				"--terms", `"pressure drop (kPa)", "fluid temp", "pressure drop (kPa)"*"fluid temp"`}, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ref := readRReference(t, tt.dataset)
			out, stderr, code := runPlumb(t, "", append([]string{"inspect", "--format", "json"}, tt.args...)...)
			if code != 0 {
				t.Fatalf("exit code %d, stderr:\n%s", code, stderr)
			}
			var got inspectJSON
			if err := json.Unmarshal([]byte(out), &got); err != nil {
				t.Fatalf("output is not JSON: %v", err)
			}
			n := len(ref.Hat)
			if got.N != n || len(got.Rows) != n || len(got.Rejected) != tt.skipped || got.RowsInFile != n+tt.skipped {
				t.Fatalf("n=%d rows=%d rejected=%d rows_in_file=%d; want n=%d, %d rejected, %d in file",
					got.N, len(got.Rows), len(got.Rejected), got.RowsInFile, n, tt.skipped, n+tt.skipped)
			}
			if got.P != len(ref.Coefficients) {
				t.Fatalf("p = %d, R has %d coefficients", got.P, len(ref.Coefficients))
			}
			if !near(got.Sigma, ref.Sigma, ref.Sigma) || !near(got.RSquared, ref.RSquared, ref.RSquared) {
				t.Errorf("sigma %v, R² %v; R gives %v, %v", got.Sigma, got.RSquared, ref.Sigma, ref.RSquared)
			}
			names := make([]string, len(ref.Coefficients))
			for j, c := range ref.Coefficients {
				names[j] = c.Term
				g := got.Coefficients[j]
				if g.Term != c.Term || !near(g.Estimate, c.Estimate, math.Abs(c.Estimate)) || !near(g.StdError, c.StdError, c.StdError) {
					t.Errorf("coefficient %d: %q %v (se %v); R: %q %v (se %v)", j, g.Term, g.Estimate, g.StdError, c.Term, c.Estimate, c.StdError)
				}
			}
			check := func(measure string, want []float64, get func(i int) *float64) {
				t.Helper()
				s := scaleOf(want)
				for i := range want {
					if g := get(i); !near(g, want[i], s) {
						t.Errorf("row %d %s = %v, R gives %.17g", got.Rows[i].Row, measure, deref(g), want[i])
					}
				}
			}
			check("leverage", ref.Hat, func(i int) *float64 { return got.Rows[i].Leverage })
			check("studentized_internal", ref.RStandard, func(i int) *float64 { return got.Rows[i].StudentizedInternal })
			check("studentized_external", ref.RStudent, func(i int) *float64 { return got.Rows[i].StudentizedExternal })
			check("cooks_distance", ref.Cook, func(i int) *float64 { return got.Rows[i].Cook })
			check("dffits", ref.DFFITS, func(i int) *float64 { return got.Rows[i].DFFITS })
			check("covratio", ref.COVRATIO, func(i int) *float64 { return got.Rows[i].COVRATIO })
			for j, nm := range names {
				col := make([]float64, n)
				for i := range col {
					col[i] = ref.DFBETAS[i][j]
				}
				check("dfbetas["+nm+"]", col, func(i int) *float64 { return got.Rows[i].DFBETAS[nm] })
			}
			for i, b := range ref.Bonf {
				if g := got.Rows[i].OutlierPBonferroni; !near(g, b, b) {
					t.Errorf("row %d outlier_p_bonferroni = %v, R gives %.17g", got.Rows[i].Row, deref(g), b)
				}
			}
		})
	}
}

func deref(p *float64) any {
	if p == nil {
		return nil
	}
	return *p
}

// TestInspectLeverageOne: a row that alone determines a coefficient has
// leverage 1 and undefined studentized residuals, Cook's distance, DFFITS,
// DFBETAS and COVRATIO (the engine gives NaN): null in JSON, an empty field
// in CSV, "undefined" in the table; the rest of the fit is reported.
func TestInspectLeverageOne(t *testing.T) {
	const data = "x,d,y\n1,0,2.1\n2,0,3.9\n3,0,6.2\n4,0,7.7\n5,1,30\n"
	args := []string{"inspect", "-", "--response", "y", "--terms", "x, d"}
	out, stderr, code := runPlumb(t, data, append(args, "--format", "json")...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var raw struct {
		Rows []map[string]any `json:"rows"`
	}
	if err := json.Unmarshal([]byte(out), &raw); err != nil {
		t.Fatal(err)
	}
	last := raw.Rows[4]
	if h, _ := last["leverage"].(float64); math.Abs(h-1) > 1e-12 {
		t.Errorf("leverage of row 5 = %v, want 1", last["leverage"])
	}
	for _, k := range []string{"studentized_internal", "studentized_external", "cooks_distance", "dffits", "covratio", "outlier_p_bonferroni"} {
		if v, ok := last[k]; !ok || v != nil {
			t.Errorf("%s = %v (present %v), want null", k, v, ok)
		}
	}
	for term, v := range last["dfbetas"].(map[string]any) {
		if v != nil {
			t.Errorf("dfbetas[%s] = %v, want null", term, v)
		}
	}
	if raw.Rows[0]["cooks_distance"] == nil {
		t.Errorf("row 1 has no Cook's distance")
	}

	out, _, code = runPlumb(t, data, append(args, "--format", "csv")...)
	if code != 0 {
		t.Fatalf("csv: exit %d", code)
	}
	recs, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for i, h := range recs[0] {
		col[h] = i
	}
	for _, k := range []string{"studentized_external", "cooks_distance", "dfbetas[d]", "covratio"} {
		if v := recs[5][col[k]]; v != "" {
			t.Errorf("csv %s of row 5 = %q, want empty", k, v)
		}
	}
	if v := recs[5][col["leverage"]]; v != "1" {
		t.Errorf("csv leverage of row 5 = %q, want 1", v)
	}

	out, _, code = runPlumb(t, data, args...)
	if code != 0 {
		t.Fatalf("table: exit %d", code)
	}
	if !strings.Contains(out, "undefined") {
		t.Errorf("table does not say the measures of row 5 are undefined:\n%s", out)
	}
}

// TestInspectJSONRowBlocks checks that the json rows, formatted in blocks
// on every core, come out as one worker writes them, over several blocks,
// and make one valid document with every row in order.
func TestInspectJSONRowBlocks(t *testing.T) {
	var big bytes.Buffer
	bw := bufio.NewWriter(&big)
	const rows = 3*csvChunk + 17
	writeBenchCSV(bw, rows, 5)
	bw.Flush()
	file := filepath.Join(t.TempDir(), "big.csv")
	if err := os.WriteFile(file, big.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	args := append([]string{"inspect", file}, benchArgs...)
	args[len(args)-1] = "json"
	par, _, code := runPlumb(t, "", args...)
	if code != 0 {
		t.Fatalf("exit code %d", code)
	}
	prev := runtime.GOMAXPROCS(1)
	seq, _, _ := runPlumb(t, "", args...)
	runtime.GOMAXPROCS(prev)
	if par != seq {
		t.Errorf("parallel json output differs from single-worker output:\n%s", firstDiff(par, seq))
	}
	var doc struct {
		Rows []struct {
			Row int `json:"row"`
		} `json:"rows"`
	}
	if err := json.Unmarshal([]byte(par), &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Rows) != rows {
		t.Fatalf("%d rows, want %d", len(doc.Rows), rows)
	}
	for i, r := range doc.Rows {
		if r.Row != i+1 {
			t.Fatalf("row %d: row field %d", i, r.Row)
		}
	}
}

// jsonStringCases are strings encoding/json writes as they are and
// strings it escapes or repairs.
var jsonStringCases = []string{
	"", "leverage", "size_adjusted", "x^2", "log(x)*z", `"flow rate (l/min)"`, "a<b", "a>b", "a&b",
	"tab\there", "nl\n", "a\\b", "é", "DFBETAS for x is 2.042, beyond ±0.3651 (size-adjusted cutoff)",
	"\u2028", "x\u2029y", "bad\xffutf8", "\x7f", "日本",
}

// TestAppendJSONString checks the hand-written string writer, and the
// flag words built in place, against encoding/json.
func TestAppendJSONString(t *testing.T) {
	for _, s := range jsonStringCases {
		want, _ := json.Marshal(s)
		if got := appendJSONString([]byte("x"), s); string(got) != "x"+string(want) {
			t.Errorf("appendJSONString(%q) = %s, want %s", s, got[1:], want)
		}
		fl := engine.Flag{Measure: engine.MeasureDFBETAS, Family: engine.FamilySizeAdjusted, Term: s, Value: 2.5, Cutoff: 0.3}
		want, _ = json.Marshal(flagWords(fl))
		if got := appendJSONFlagWords([]byte("x"), fl); string(got) != "x"+string(want) {
			t.Errorf("flag words for term %q: %s, want %s", s, got[1:], want)
		}
	}
}

// BenchmarkJSONString compares the hand-written string writer with
// json.Marshal on the strings of the json rows (measure, family and flag
// words).
func BenchmarkJSONString(b *testing.B) {
	strs := []string{engine.MeasureDFBETAS, engine.FamilySizeAdjusted, "emf_mv^2",
		"DFBETAS for emf_mv is 2.042, beyond ±0.3651 (size-adjusted cutoff)"}
	b.Run("append", func(b *testing.B) {
		b.ReportAllocs()
		var dst []byte
		for b.Loop() {
			for _, s := range strs {
				dst = appendJSONString(dst[:0], s)
			}
		}
	})
	b.Run("marshal", func(b *testing.B) {
		b.ReportAllocs()
		var dst []byte
		for b.Loop() {
			for _, s := range strs {
				m, _ := json.Marshal(s)
				dst = append(dst[:0], m...)
			}
		}
	})
}
