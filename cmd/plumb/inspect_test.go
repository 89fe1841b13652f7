package main

import (
	"bufio"
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
)

// updateGolden rewrites the golden files of cmd/plumb/testdata/inspect:
//
//	go test ./cmd/plumb -run TestInspectGolden -update
//
// The flag is shared with any other test in this package that defines
// "update" first.
var updateGolden = func() *bool {
	if f := flag.Lookup("update"); f != nil {
		if g, ok := f.Value.(flag.Getter); ok {
			if b, ok := g.Get().(bool); ok {
				v := b
				return &v
			}
		}
	}
	return flag.Bool("update", false, "rewrite golden files")
}()

func golden() bool {
	if f := flag.Lookup("update"); f != nil {
		return f.Value.String() == "true"
	}
	return *updateGolden
}

const inspectDir = "testdata/inspect"

// runPlumb runs plumb in-process with the given stdin and returns what it
// wrote and its exit code.
func runPlumb(tb testing.TB, stdin string, args ...string) (stdout, stderr string, code int) {
	tb.Helper()
	var out, errb bytes.Buffer
	e := &env{stdin: strings.NewReader(stdin), stdout: &out, stderr: &errb, getenv: func(string) string { return "" }}
	code = runMain(context.Background(), e, args)
	return out.String(), errb.String(), code
}

func fixture(name string) string { return filepath.Join(inspectDir, name) }

const thermoTerms = "emf_mv, emf_mv^2"

// TestInspectGolden checks the three output formats against golden files.
func TestInspectGolden(t *testing.T) {
	tests := []struct {
		name   string
		args   []string
		golden string
	}{
		{"table", []string{"inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms}, "thermo.table.golden"},
		{"json", []string{"inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms, "--format", "json"}, "thermo.json.golden"},
		{"csv", []string{"inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms, "--format", "csv"}, "thermo.csv.golden"},
		{"table quoted names", []string{"inspect", fixture("flow.csv"), "--response", "flow rate (l/min)",
			"--terms", `"pressure drop (kPa)", "fluid temp", "pressure drop (kPa)"*"fluid temp"`}, "flow.table.golden"},
		{"table no intercept", []string{"inspect", fixture("cars.csv"), "--response", "dist", "--terms", "speed, speed^2", "--no-intercept"}, "cars_origin.table.golden"},
		{"table fragility and suggestions", []string{"inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms,
			"--fragility", "--checkpoint", "emf_mv=48.2:0.5", "--suggest", "--region", "emf_mv=0:65"}, "thermo_fragility.table.golden"},
		{"json fragility and suggestions", []string{"inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms,
			"--fragility", "--checkpoint", "emf_mv=48.2:0.5", "--suggest", "--region", "emf_mv=0:65", "--format", "json"}, "thermo_fragility.json.golden"},
		{"table absolute cutoffs grubbs", []string{"inspect", fixture("stackloss.csv"), "--response", "stack.loss",
			"--terms", "Air.Flow, Water.Temp, Acid.Conc.", "--cutoffs", "absolute", "--cook-rule", "one", "--outlier-test", "grubbs", "--alpha", "0.1"}, "stackloss_absolute.table.golden"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			out, _, code := runPlumb(t, "", tt.args...)
			if code != 0 {
				t.Fatalf("exit code %d, want 0", code)
			}
			path := fixture(tt.golden)
			if golden() {
				if err := os.WriteFile(path, []byte(out), 0o644); err != nil {
					t.Fatal(err)
				}
				return
			}
			want, err := os.ReadFile(path)
			if err != nil {
				t.Fatalf("%v (run with -update to create it)", err)
			}
			if strings.HasSuffix(path, ".json.golden") {
				// The JSON golden fixes the shape, every string and every
				// number to 1e-10 relative: last-digit changes in the
				// engine's arithmetic are not a change of the report (the
				// engine's accuracy is checked against R in engine/).
				var g, w any
				if err := json.Unmarshal([]byte(out), &g); err != nil {
					t.Fatalf("output is not JSON: %v", err)
				}
				if err := json.Unmarshal(want, &w); err != nil {
					t.Fatalf("%s: %v", path, err)
				}
				if msg := jsonDiff("", g, w); msg != "" {
					t.Errorf("output differs from %s (run with -update and review the diff): %s", path, msg)
				}
				return
			}
			if out != string(want) {
				t.Errorf("output differs from %s (run with -update and review the diff):\n%s", path, firstDiff(out, string(want)))
			}
		})
	}
}

// jsonDiff describes the first difference between two decoded JSON
// values, numbers compared to 1e-10 relative; "" when they agree.
func jsonDiff(path string, got, want any) string {
	switch w := want.(type) {
	case map[string]any:
		g, ok := got.(map[string]any)
		if !ok {
			return path + ": not an object"
		}
		if len(g) != len(w) {
			return fmt.Sprintf("%s: %d keys, want %d", path, len(g), len(w))
		}
		for k, wv := range w {
			gv, ok := g[k]
			if !ok {
				return path + "." + k + ": missing"
			}
			if m := jsonDiff(path+"."+k, gv, wv); m != "" {
				return m
			}
		}
	case []any:
		g, ok := got.([]any)
		if !ok || len(g) != len(w) {
			return fmt.Sprintf("%s: array of %d, want %d", path, len(g), len(w))
		}
		for i := range w {
			if m := jsonDiff(fmt.Sprintf("%s[%d]", path, i), g[i], w[i]); m != "" {
				return m
			}
		}
	case float64:
		g, ok := got.(float64)
		if !ok || math.Abs(g-w) > 1e-10*math.Abs(w) {
			return fmt.Sprintf("%s: %v, want %v", path, got, w)
		}
	default:
		if got != want {
			return fmt.Sprintf("%s: %v, want %v", path, got, want)
		}
	}
	return ""
}

// firstDiff shows the first differing line of two texts.
func firstDiff(got, want string) string {
	g, w := strings.Split(got, "\n"), strings.Split(want, "\n")
	for i := 0; i < len(g) || i < len(w); i++ {
		var a, b string
		if i < len(g) {
			a = g[i]
		}
		if i < len(w) {
			b = w[i]
		}
		if a != b {
			return "line " + strconv.Itoa(i+1) + ":\n got: " + a + "\nwant: " + b
		}
	}
	return "(no difference in lines)"
}

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
		Line                int                 `json:"line"`
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
		File   string `json:"file"`
		Row    int    `json:"row"`
		Line   int    `json:"line"`
		Column int    `json:"column"`
		Field  string `json:"field"`
		Reason string `json:"reason"`
	} `json:"rejected"`
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

// TestInspectRejectedRows checks that unreadable rows are listed with
// file:line:column and the reason, never dropped silently: on stderr for
// table and csv, in "rejected" for json; and that --strict refuses the
// file.
func TestInspectRejectedRows(t *testing.T) {
	base := []string{"inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms}
	// thermo.csv: line 12 holds "11.5x" in emf_mv (field 2, which starts
	// at byte 10); line 24 has 3 fields instead of 4.
	wantStderr := []string{
		fixture("thermo.csv") + ":12:10: row left out: ",
		"not a number",
		fixture("thermo.csv") + ":24:",
		"wrong number of fields",
	}
	for _, format := range []string{"table", "csv"} {
		t.Run(format, func(t *testing.T) {
			_, stderr, code := runPlumb(t, "", append(base, "--format", format)...)
			if code != 0 {
				t.Fatalf("exit code %d, want 0; stderr:\n%s", code, stderr)
			}
			for _, w := range wantStderr {
				if !strings.Contains(stderr, w) {
					t.Errorf("stderr lacks %q:\n%s", w, stderr)
				}
			}
		})
	}
	t.Run("json", func(t *testing.T) {
		out, stderr, code := runPlumb(t, "", append(base, "--format", "json")...)
		if code != 0 || stderr != "" {
			t.Fatalf("exit code %d, stderr %q; want 0 and nothing", code, stderr)
		}
		var got inspectJSON
		if err := json.Unmarshal([]byte(out), &got); err != nil {
			t.Fatal(err)
		}
		if len(got.Rejected) != 2 {
			t.Fatalf("rejected = %+v, want 2 rows", got.Rejected)
		}
		r0, r1 := got.Rejected[0], got.Rejected[1]
		if r0.File != fixture("thermo.csv") || r0.Row != 11 || r0.Line != 12 || r0.Column != 10 || r0.Field != "emf_mv" || !strings.Contains(r0.Reason, "not a number") {
			t.Errorf("first rejected row = %+v", r0)
		}
		if r1.Row != 23 || r1.Line != 24 || !strings.Contains(r1.Reason, "wrong number of fields") {
			t.Errorf("second rejected row = %+v", r1)
		}
		// Kept rows keep their own row and line numbers.
		if r := got.Rows[11]; r.Row != 13 || r.Line != 14 {
			t.Errorf("12th kept row is row %d, line %d; want row 13, line 14", r.Row, r.Line)
		}
	})
	t.Run("strict", func(t *testing.T) {
		out, stderr, code := runPlumb(t, "", append(base, "--strict", "--format", "json")...)
		if code != 1 {
			t.Errorf("exit code %d, want 1", code)
		}
		if out != "" {
			t.Errorf("stdout = %q, want nothing under --strict", out)
		}
		for _, w := range append(wantStderr, "--strict") {
			if !strings.Contains(stderr, w) {
				t.Errorf("stderr lacks %q:\n%s", w, stderr)
			}
		}
	})
	t.Run("log of non-positive value", func(t *testing.T) {
		csvText := "x,y\n1,2\n2,3.9\n-1,0.1\n3,6.2\n4,7.7\n5,10.1\n"
		out, stderr, code := runPlumb(t, csvText, "inspect", "-", "--response", "y", "--terms", "log(x)", "--format", "json")
		if code != 0 {
			t.Fatalf("exit code %d; stderr:\n%s", code, stderr)
		}
		var got inspectJSON
		if err := json.Unmarshal([]byte(out), &got); err != nil {
			t.Fatal(err)
		}
		if got.N != 5 || len(got.Rejected) != 1 {
			t.Fatalf("n = %d, rejected %+v; want 5 and one row", got.N, got.Rejected)
		}
		if r := got.Rejected[0]; r.File != "stdin" || r.Line != 4 || r.Column != 1 || r.Row != 3 || !strings.Contains(r.Reason, "log") {
			t.Errorf("rejected = %+v, want stdin:4:1 row 3 with a log reason", r)
		}
	})
	t.Run("log of non-positive value after a multi-line field", func(t *testing.T) {
		// Line 4 starts a record whose quoted id runs onto line 5
		// (`c",0,0.1`); x is the second field, at byte 4 of line 5.
		csvText := "id,x,y\na,1,2\nb,2,3.9\n\"c\nc\",0,0.1\nd,3,6.2\ne,4,7.7\nf,5,10.1\n"
		out, stderr, code := runPlumb(t, csvText, "inspect", "-", "--response", "y", "--terms", "log(x)", "--format", "json")
		if code != 0 {
			t.Fatalf("exit code %d; stderr:\n%s", code, stderr)
		}
		var got inspectJSON
		if err := json.Unmarshal([]byte(out), &got); err != nil {
			t.Fatal(err)
		}
		if len(got.Rejected) != 1 {
			t.Fatalf("rejected %+v, want one row", got.Rejected)
		}
		if r := got.Rejected[0]; r.Line != 5 || r.Column != 4 || r.Row != 3 || r.Field != "x" {
			t.Errorf("rejected = %+v, want stdin:5:4 row 3 field x", r)
		}
	})
	t.Run("strict clean file", func(t *testing.T) {
		_, stderr, code := runPlumb(t, "", "inspect", fixture("cars.csv"), "--response", "dist", "--terms", "speed", "--strict")
		if code != 0 {
			t.Errorf("exit code %d, want 0; stderr:\n%s", code, stderr)
		}
	})
}

// TestInspectErrors checks exit codes and messages for bad command lines
// and unusable files.
func TestInspectErrors(t *testing.T) {
	dir := t.TempDir()
	write := func(name, text string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	empty := write("empty.csv", "")
	headerOnly := write("header.csv", "x,y\n")
	tooFew := write("few.csv", "x,y\n1,2\n2,4\n")
	constant := write("const.csv", "x,y\n1,2\n1,4\n1,5\n1,7\n")
	thermo := fixture("thermo.csv")
	tests := []struct {
		name string
		args []string
		code int
		want []string // substrings of stderr
	}{
		{"no file", []string{"--response", "y", "--terms", "x"}, 2, []string{"no CSV file"}},
		{"two files", []string{thermo, thermo, "--response", "y", "--terms", "x"}, 2, []string{"one CSV file at a time"}},
		{"no response", []string{thermo, "--terms", "x"}, 2, []string{"--response is required"}},
		{"no terms", []string{thermo, "--response", "temp_c"}, 2, []string{"--terms is required"}},
		{"bad format", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--format", "xml"}, 2, []string{`--format "xml"`}},
		{"bad delimiter", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--delimiter", ";;"}, 2, []string{"--delimiter"}},
		{"bad alpha", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--alpha", "1.5"}, 2, []string{"--alpha"}},
		{"bad cutoffs", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--cutoffs", "loose"}, 2, []string{"--cutoffs"}},
		{"bad cook rule", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--cook-rule", "two"}, 2, []string{"--cook-rule"}},
		{"bad outlier test", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--outlier-test", "dixon"}, 2, []string{"--outlier-test"}},
		{"unknown flag", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--frobnicate"}, 2, []string{"frobnicate"}},
		// The caret sits under the offending character of the whole
		// --terms string: "emf_mv, emf_mv^x" has the bad power at byte 15.
		{"bad power", []string{thermo, "--response", "temp_c", "--terms", "emf_mv, emf_mv^x"}, 2,
			[]string{"power must be a whole number 1-20", "(character 16)", "\n  emf_mv, emf_mv^x\n                 ^"}},
		{"open quote", []string{thermo, "--response", "temp_c", "--terms", `emf_mv, "emf mv`}, 2,
			[]string{"never closed", "\n  emf_mv, \"emf mv\n          ^"}},
		{"empty term", []string{thermo, "--response", "temp_c", "--terms", "emf_mv,,emf_mv^2"}, 2,
			[]string{"empty term", "\n  emf_mv,,emf_mv^2\n         ^"}},
		{"repeated term", []string{thermo, "--response", "temp_c", "--terms", "emf_mv, emf_mv^2, emf_mv"}, 2,
			[]string{"same as term", "(character 19)", "\n  emf_mv, emf_mv^2, emf_mv\n                    ^"}},
		{"response used as a term", []string{thermo, "--response", "temp_c", "--terms", "emf_mv, temp_c"}, 2,
			[]string{"response", "\n  emf_mv, temp_c\n          ^"}},
		{"unknown column", []string{thermo, "--response", "temp_c", "--terms", "emf_mv, emf_v"}, 1,
			[]string{`"emf_v"`, "column not in header", `"bath"`, `"emf_mv"`, `"operator note"`, `"temp_c"`}},
		{"unknown response", []string{thermo, "--response", "temp", "--terms", "emf_mv"}, 1,
			[]string{`"temp"`, "column not in header", `"temp_c"`}},
		{"missing file", []string{filepath.Join(dir, "nope.csv"), "--response", "y", "--terms", "x"}, 1, []string{"nope.csv", "no such file"}},
		{"empty file", []string{empty, "--response", "y", "--terms", "x"}, 1, []string{"empty.csv", "empty"}},
		{"header only", []string{headerOnly, "--response", "y", "--terms", "x"}, 1, []string{"header.csv", "no data rows"}},
		{"too few rows", []string{tooFew, "--response", "y", "--terms", "x"}, 1, []string{"2 usable rows for 2 coefficients"}},
		{"constant term", []string{constant, "--response", "y", "--terms", "x"}, 1, []string{"const.csv", "constant"}},
		{"bad checkpoint value", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--fragility", "--checkpoint", "emf_mv=abc:0.5"}, 2, []string{"--checkpoint", "not a finite number"}},
		{"bad checkpoint tolerance", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--fragility", "--checkpoint", "emf_mv=4:0"}, 2, []string{"--checkpoint", "positive"}},
		{"checkpoint without tolerance", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--fragility", "--checkpoint", "emf_mv=4"}, 2, []string{"--checkpoint", "TOLERANCE"}},
		{"checkpoint missing a column", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--fragility", "--checkpoint", "bath=4:0.5"}, 2, []string{"emf_mv"}},
		{"checkpoint alone", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--checkpoint", "emf_mv=4:0.5"}, 2, []string{"needs --fragility"}},
		{"region alone", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--region", "emf_mv=0:5"}, 2, []string{"needs --suggest"}},
		{"region upside down", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--suggest", "--region", "emf_mv=5:0"}, 2, []string{"lower bound"}},
		{"region unknown column", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--suggest", "--region", "bath_c=0:5"}, 2, []string{`"bath_c"`, "not a predictor column"}},
		{"bad max removed", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--fragility", "--max-removed", "0"}, 2, []string{"--max-removed"}},
		{"bad replicates", []string{thermo, "--response", "temp_c", "--terms", "emf_mv", "--suggest", "--replicates", "0"}, 2, []string{"--replicates"}},
		{"all rows bad", []string{thermo, "--response", "temp_c", "--terms", "\"operator note\""}, 1, []string{"none of the"}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			out, stderr, code := runPlumb(t, "", append([]string{"inspect"}, tt.args...)...)
			if code != tt.code {
				t.Errorf("exit code %d, want %d; stderr:\n%s", code, tt.code, stderr)
			}
			if out != "" {
				t.Errorf("stdout = %q, want nothing", out)
			}
			for _, w := range tt.want {
				if !strings.Contains(stderr, w) {
					t.Errorf("stderr lacks %q:\n%s", w, stderr)
				}
			}
		})
	}
}

// TestInspectFragility checks the fragility search and the suggestions
// against refits done by the command itself: leaving out the reported row
// and fitting again must move the checkpoint's prediction from "before" to
// "after"; a suggestion at a recorded row's predictor value has d equal to
// that row's leverage (d(x_i) = h_ii, common practice; Atkinson, Donev &
// Tobias 2007, from memory), d_gain = 1 + d and det_ratio = 1 + r d
// (matrix determinant lemma).
func TestInspectFragility(t *testing.T) {
	const at = 48.2
	predict := func(js inspectJSON) float64 {
		c := js.Coefficients
		return *c[0].Estimate + *c[1].Estimate*at + *c[2].Estimate*at*at
	}
	out, stderr, code := runPlumb(t, "", "inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms,
		"--fragility", "--checkpoint", "emf_mv=48.2:0.5", "--suggest", "--format", "json")
	if code != 0 {
		t.Fatalf("exit code %d: %s", code, stderr)
	}
	var got struct {
		inspectJSON
		Fragility struct {
			Index        *int     `json:"index"`
			Searched     string   `json:"searched"`
			RemovedRows  []int    `json:"removed_rows"`
			RemovedLines []int    `json:"removed_lines"`
			Conclusion   string   `json:"conclusion"`
			Before       *float64 `json:"before"`
			After        *float64 `json:"after"`
			Fragile      bool     `json:"fragile"`
		} `json:"fragility"`
		Suggestions []struct {
			At         map[string]float64 `json:"at"`
			Replicates int                `json:"replicates"`
			D          float64            `json:"d"`
			DGain      float64            `json:"d_gain"`
			Effect     struct {
				DetRatio float64 `json:"det_ratio"`
				Rows     []struct {
					Row  int `json:"row"`
					Line int `json:"line"`
				} `json:"rows"`
			} `json:"effect"`
			Text string `json:"text"`
		} `json:"suggestions"`
	}
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatal(err)
	}
	fr := got.Fragility
	if fr.Index == nil || *fr.Index != 1 || len(fr.RemovedRows) != 1 || fr.RemovedRows[0] != 32 || fr.RemovedLines[0] != 33 || !fr.Fragile {
		t.Fatalf("fragility = %+v, want index 1 by removing row 32 (line 33)", fr)
	}
	if !strings.Contains(fr.Conclusion, "prediction at emf_mv=48.2") || fr.Searched != "exhaustive" {
		t.Errorf("conclusion %q searched %q", fr.Conclusion, fr.Searched)
	}
	if b := predict(got.inspectJSON); math.Abs(*fr.Before-b) > 1e-9*math.Abs(b) {
		t.Errorf("before = %v, prediction from the coefficients %v", *fr.Before, b)
	}
	// Refit without line 33 (the last line of thermo.csv).
	text, err := os.ReadFile(fixture("thermo.csv"))
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.SplitAfter(string(text), "\n")
	without := strings.Join(append(append([]string{}, lines[:32]...), lines[33:]...), "")
	out2, stderr2, code := runPlumb(t, without, "inspect", "-", "--response", "temp_c", "--terms", thermoTerms, "--format", "json")
	if code != 0 {
		t.Fatalf("refit without line 33: exit %d: %s", code, stderr2)
	}
	var refit inspectJSON
	if err := json.Unmarshal([]byte(out2), &refit); err != nil {
		t.Fatal(err)
	}
	if refit.N != 29 {
		t.Fatalf("refit has n = %d, want 29", refit.N)
	}
	if a := predict(refit); math.Abs(*fr.After-a) > 1e-9*math.Abs(a) {
		t.Errorf("after = %.12g, refit without row 32 predicts %.12g", *fr.After, a)
	}
	if math.Abs(*fr.After-*fr.Before) <= 0.5 {
		t.Errorf("|after - before| = %v, should exceed the tolerance 0.5", math.Abs(*fr.After-*fr.Before))
	}

	if len(got.Suggestions) == 0 {
		t.Fatal("no suggestions")
	}
	var h32 float64
	for _, r := range got.Rows {
		if r.Row == 32 {
			h32 = *r.Leverage
		}
	}
	for i, sg := range got.Suggestions {
		if math.Abs(sg.DGain-(1+sg.D)) > 1e-12 || math.Abs(sg.Effect.DetRatio-(1+float64(sg.Replicates)*sg.D)) > 1e-9 {
			t.Errorf("suggestion %d: d %v, d_gain %v, det_ratio %v with %d replicates", i, sg.D, sg.DGain, sg.Effect.DetRatio, sg.Replicates)
		}
		x, ok := sg.At["emf_mv"]
		if !ok || x < 2.102 || x > 61.5 {
			t.Errorf("suggestion %d at %v, outside the observed range of emf_mv", i, sg.At)
		}
		if x == 61.5 && math.Abs(sg.D-h32) > 1e-9*h32 {
			t.Errorf("suggestion at emf_mv = 61.5 (row 32's value) has d = %v, row 32's leverage is %v", sg.D, h32)
		}
		if !strings.Contains(sg.Text, "(line ") {
			t.Errorf("suggestion text does not name rows by file line: %q", sg.Text)
		}
	}
	if got.Suggestions[0].At["emf_mv"] != 61.5 {
		t.Errorf("first suggestion at %v; the far end of the range (61.5) lowers row 32's leverage most", got.Suggestions[0].At)
	}
}

// TestInspectSplitDecode cuts a file with quoted, multi-line and bad
// fields into many parts and checks that the result equals decoding it in
// one piece.
func TestInspectSplitDecode(t *testing.T) {
	var b strings.Builder
	b.WriteString("id,note,x,y\n")
	r := rand.New(rand.NewPCG(3, 4))
	for i := 0; i < 400; i++ {
		x := r.Float64() * 10
		y := 1 + 2*x + r.NormFloat64()
		note := "plain"
		switch i % 7 {
		case 1:
			note = `"two, parts"`
		case 2:
			note = "\"line one\nline two\""
		case 3:
			note = `"say ""when"""`
		}
		ys := strconv.FormatFloat(y, 'f', 4, 64)
		if i%53 == 0 {
			ys = "n/a"
		}
		b.WriteString(strconv.Itoa(i) + "," + note + "," + strconv.FormatFloat(x, 'f', 4, 64) + "," + ys + "\n")
	}
	text := b.String()
	args := []string{"inspect", "-", "--response", "y", "--terms", "x", "--format", "json"}
	whole, _, code := runPlumb(t, text, args...)
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	prevMin, prevProcs := minPartBytes, runtime.GOMAXPROCS(7)
	minPartBytes = 64
	defer func() { minPartBytes = prevMin; runtime.GOMAXPROCS(prevProcs) }()
	if parts := splitRecords([]byte(text), 12, 1, 7); len(parts) < 5 {
		t.Fatalf("file cut into %d parts, want 7", len(parts))
	}
	split, _, code := runPlumb(t, text, args...)
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	if split != whole {
		t.Errorf("decoding in parts differs from decoding in one piece:\n%s", firstDiff(split, whole))
	}
	var js inspectJSON
	if err := json.Unmarshal([]byte(split), &js); err != nil {
		t.Fatal(err)
	}
	if len(js.Rejected) != 8 || js.N != 392 {
		t.Errorf("n = %d, %d rejected; want 392 and 8", js.N, len(js.Rejected))
	}
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

func TestInspectHelp(t *testing.T) {
	for _, args := range [][]string{{"inspect", "--help"}, {"help", "inspect"}} {
		_, stderr, code := runPlumb(t, "", args...)
		if code != 0 {
			t.Errorf("%v: exit code %d, want 0", args, code)
		}
		for _, w := range []string{"Usage: plumb inspect", "-response", "-terms", "-no-intercept", "-format", "-delimiter",
			"-strict", "-alpha", "-cutoffs", "-cook-rule", "-outlier-test", "-fragility", "-max-removed", "-checkpoint",
			"-suggest", "-region", "-replicates", "never alters a measurement"} {
			if !strings.Contains(stderr, w) {
				t.Errorf("%v: help lacks %q", args, w)
			}
		}
	}
}

func TestSplitTerms(t *testing.T) {
	tests := []struct {
		in      string
		want    []termSpan
		wantErr int // position of the error, -1 for none
	}{
		{"a, b, a^2", []termSpan{{"a", 0}, {" b", 2}, {" a^2", 5}}, -1},
		{`"x, y", z`, []termSpan{{`"x, y"`, 0}, {" z", 7}}, -1},
		{`"say ""hi"", ok", z`, []termSpan{{`"say ""hi"", ok"`, 0}, {" z", 17}}, -1},
		{"a,", []termSpan{{"a", 0}, {"", 2}}, -1},
		{`a, "b`, nil, 3},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			got, err := splitTerms(tt.in)
			if tt.wantErr >= 0 {
				var te *termsError
				if !errors.As(err, &te) || te.pos != tt.wantErr {
					t.Fatalf("error %v, want a termsError at %d", err, tt.wantErr)
				}
				if !errors.Is(err, errUsage) {
					t.Errorf("error does not wrap errUsage")
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != len(tt.want) {
				t.Fatalf("got %+v, want %+v", got, tt.want)
			}
			for i := range got {
				if got[i] != tt.want[i] {
					t.Errorf("piece %d = %+v, want %+v", i, got[i], tt.want[i])
				}
			}
		})
	}
}

// TestInspectCSVFormat reads the csv output back with encoding/csv: one
// record per row with as many fields as the header, quoted names intact,
// and the same numbers (to 10 digits) as the JSON output; the parallel
// writer gives the same bytes as a single worker.
func TestInspectCSVFormat(t *testing.T) {
	args := []string{"inspect", fixture("flow.csv"), "--response", "flow rate (l/min)",
		"--terms", `"pressure drop (kPa)", "fluid temp", "pressure drop (kPa)"*"fluid temp"`}
	out, _, code := runPlumb(t, "", append(args, "--format", "csv")...)
	if code != 0 {
		t.Fatalf("exit code %d", code)
	}
	recs, err := csv.NewReader(strings.NewReader(out)).ReadAll()
	if err != nil {
		t.Fatalf("csv output does not parse: %v", err)
	}
	if len(recs) != 41 {
		t.Fatalf("%d records, want header + 40", len(recs))
	}
	head := recs[0]
	col := map[string]int{}
	for i, h := range head {
		col[h] = i
	}
	for _, want := range []string{"row", "line", "leverage", "cooks_distance", `dfbetas["pressure drop (kPa)"*"fluid temp"]`, "dfbetas[intercept]", "covratio", "outlier_p_bonferroni", "flags"} {
		if _, ok := col[want]; !ok {
			t.Errorf("header lacks %q: %q", want, head)
		}
	}
	jout, _, _ := runPlumb(t, "", append(args, "--format", "json")...)
	var js inspectJSON
	if err := json.Unmarshal([]byte(jout), &js); err != nil {
		t.Fatal(err)
	}
	for i, rec := range recs[1:] {
		h, err := strconv.ParseFloat(rec[col["leverage"]], 64)
		if err != nil {
			t.Fatalf("row %d leverage %q: %v", i+1, rec[col["leverage"]], err)
		}
		if want := *js.Rows[i].Leverage; math.Abs(h-want) > 1e-9*math.Abs(want) {
			t.Errorf("row %d leverage %v in csv, %v in json", i+1, h, want)
		}
		if rec[col["row"]] != strconv.Itoa(js.Rows[i].Row) {
			t.Errorf("row %d: row field %q", i+1, rec[col["row"]])
		}
	}

	// Parallel and single-worker output agree, over several chunks.
	var big bytes.Buffer
	bw := bufio.NewWriter(&big)
	writeBenchCSV(bw, 3*csvChunk+17, 5)
	bw.Flush()
	file := filepath.Join(t.TempDir(), "big.csv")
	if err := os.WriteFile(file, big.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	bargs := append([]string{"inspect", file}, benchArgs...)
	par, _, code := runPlumb(t, "", bargs...)
	if code != 0 {
		t.Fatalf("exit code %d", code)
	}
	prev := runtime.GOMAXPROCS(1)
	seq, _, _ := runPlumb(t, "", bargs...)
	runtime.GOMAXPROCS(prev)
	if par != seq {
		t.Errorf("parallel csv output differs from single-worker output:\n%s", firstDiff(par, seq))
	}
	if n := strings.Count(par, "\n"); n != 3*csvChunk+17+1 {
		t.Errorf("%d lines, want %d", n, 3*csvChunk+17+1)
	}
}

// TestInspectDelimiter reads a semicolon-separated file and a tab one.
func TestInspectDelimiter(t *testing.T) {
	for _, d := range []struct{ flag, sep string }{{";", ";"}, {`\t`, "\t"}} {
		text := strings.ReplaceAll("x,y\n1,2.1\n2,3.9\n3,6.2\n4,7.7\n5,10.1\n", ",", d.sep)
		out, stderr, code := runPlumb(t, text, "inspect", "-", "--response", "y", "--terms", "x", "--delimiter", d.flag, "--format", "json")
		if code != 0 {
			t.Fatalf("delimiter %q: exit %d: %s", d.flag, code, stderr)
		}
		var got inspectJSON
		if err := json.Unmarshal([]byte(out), &got); err != nil {
			t.Fatal(err)
		}
		// Least squares by hand: x̄ = 3, ȳ = 6, Sxy = 19.8, Sxx = 10, so
		// slope 1.98 and intercept 6 - 3*1.98 = 0.06.
		if got.N != 5 || math.Abs(*got.Coefficients[1].Estimate-1.98) > 1e-12 || math.Abs(*got.Coefficients[0].Estimate-0.06) > 1e-12 {
			t.Errorf("delimiter %q: n=%d, coefficients %v %v; want 5, 0.06, 1.98", d.flag, got.N, deref(got.Coefficients[0].Estimate), deref(got.Coefficients[1].Estimate))
		}
	}
}

// benchArgs is the 6-coefficient model the benchmark fits.
var benchArgs = []string{"--response", "reading", "--terms", "emf_mv, bath_c, rh_pct, pressure_kpa, emf_mv^2", "--format", "csv"}

// writeBenchCSV writes the seeded benchmark data of an invented
// thermocouple calibration bench (the fictitious Ketterby instrument
// workshop). testdata/bench/inspect_vs_r.sh writes its file through
// TestWriteBenchCSV, so the Go benchmark and the comparison with R read
// the same bytes.
func writeBenchCSV(w *bufio.Writer, rows int, seed uint64) {
	r := rand.New(rand.NewPCG(seed, 0x6b65747465726279))
	stations := []string{"bench A", "bench B", `"bench C, left"`, "bench D"}
	w.WriteString("sample,station,emf_mv,bath_c,rh_pct,pressure_kpa,reading\n")
	var b []byte
	for i := 0; i < rows; i++ {
		emf := 2 + 48*r.Float64()
		bath := 15 + 20*r.Float64()
		rh := 25 + 40*r.Float64()
		kpa := 98 + 6*r.Float64()
		y := 1.2 + 24.1*emf - 0.071*emf*emf + 0.35*bath - 0.02*rh + 0.08*kpa + 0.9*r.NormFloat64()
		if i%997 == 0 {
			y += 15 // a mis-keyed reading now and then
		}
		b = b[:0]
		b = append(b, 'S')
		b = strconv.AppendInt(b, int64(i+1), 10)
		b = append(b, ',')
		b = append(b, stations[i%len(stations)]...)
		b = append(b, ',')
		b = strconv.AppendFloat(b, emf, 'f', 4, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, bath, 'f', 3, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, rh, 'f', 1, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, kpa, 'f', 3, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, y, 'f', 3, 64)
		b = append(b, '\n')
		w.Write(b)
	}
}

// TestWriteBenchCSV writes the benchmark CSV to $PLUMB_BENCH_CSV
// ($PLUMB_BENCH_ROWS rows, default 100,000, seed 1) for
// testdata/bench/inspect_vs_r.sh; without the variable it does nothing.
func TestWriteBenchCSV(t *testing.T) {
	path := os.Getenv("PLUMB_BENCH_CSV")
	if path == "" {
		t.Skip("set PLUMB_BENCH_CSV to write the benchmark file")
	}
	rows := 100000
	if v := os.Getenv("PLUMB_BENCH_ROWS"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 {
			t.Fatalf("PLUMB_BENCH_ROWS = %q: want a positive number", v)
		}
		rows = n
	}
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w := bufio.NewWriterSize(f, 1<<16)
	writeBenchCSV(w, rows, 1)
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
}

// BenchmarkInspectCSV times the whole command on a 100,000-row CSV with a
// 6-coefficient model: read, parse, fit, diagnose, judge and write every
// row's measures as CSV (to io.Discard).
func BenchmarkInspectCSV(b *testing.B) {
	for _, rows := range []int{1000, 100000} {
		b.Run("rows="+strconv.Itoa(rows), func(b *testing.B) {
			file := filepath.Join(b.TempDir(), "bench.csv")
			fh, err := os.Create(file)
			if err != nil {
				b.Fatal(err)
			}
			w := bufio.NewWriter(fh)
			writeBenchCSV(w, rows, 1)
			if err := w.Flush(); err != nil {
				b.Fatal(err)
			}
			fh.Close()
			st, _ := os.Stat(file)
			b.SetBytes(st.Size())
			e := &env{stdin: strings.NewReader(""), stdout: io.Discard, stderr: io.Discard, getenv: func(string) string { return "" }}
			args := append([]string{"inspect", file}, benchArgs...)
			b.ReportAllocs()
			for b.Loop() {
				if code := runMain(context.Background(), e, args); code != 0 {
					b.Fatalf("exit code %d", code)
				}
			}
		})
	}
}

// FuzzInspectTerms: splitting and parsing any --terms value never panics,
// the pieces put back together with commas give the input, and an error
// points inside the string.
func FuzzInspectTerms(f *testing.F) {
	for _, s := range []string{"a, b, a^2", `"x, y", log(z)^2`, `a, "b`, "a,,b", `"say ""hi""", a*b`, "x^0", "log(", ""} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		spans, err := splitTerms(s)
		if err == nil {
			parts := make([]string, len(spans))
			for i, sp := range spans {
				parts[i] = sp.text
				if s[sp.start:sp.start+len(sp.text)] != sp.text {
					t.Fatalf("piece %d %q does not start at %d of %q", i, sp.text, sp.start, s)
				}
			}
			if strings.Join(parts, ",") != s {
				t.Fatalf("pieces %q do not rebuild %q", parts, s)
			}
		}
		_, err = inspectModel(&inspectOptions{response: "y", terms: s})
		var te *termsError
		if errors.As(err, &te) {
			if te.pos < 0 || te.pos > len(s) {
				t.Fatalf("error position %d outside %q", te.pos, s)
			}
			_ = te.Error()
		}
	})
}
