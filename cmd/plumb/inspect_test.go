package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
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
		{"table answers and units", []string{"inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms,
			"--at", "emf_mv=10", "--at", "emf_mv=30", "--reading", "150", "--reading", "1800,5", "--readings-averaged", "3", "--level", "0.99",
			"--unit", "temp_c=°C", "--unit", "emf_mv=mV"}, "thermo_answers.table.golden"},
		{"json answers and units", []string{"inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms,
			"--at", "emf_mv=10", "--at", "emf_mv=30", "--reading", "150", "--reading", "1800,5", "--readings-averaged", "3", "--level", "0.99",
			"--unit", "temp_c=°C,emf_mv=mV", "--format", "json"}, "thermo_answers.json.golden"},
		{"table absolute cutoffs grubbs", []string{"inspect", fixture("stackloss.csv"), "--response", "stack.loss",
			"--terms", "Air.Flow, Water.Temp, Acid.Conc.", "--cutoffs", "absolute", "--cook-rule", "one", "--outlier-test", "grubbs", "--alpha", "0.1"}, "stackloss_absolute.table.golden"},
		// R's mtcars and airquality as R writes them (testdata/rdata).
		{"table id column", []string{"inspect", rdata("mtcars.csv"), "--response", "mpg", "--terms", "wt, hp", "--id-column", "model"}, "mtcars_id.table.golden"},
		{"csv id column", []string{"inspect", rdata("mtcars.csv"), "--response", "mpg", "--terms", "wt, hp", "--id-column", "model", "--format", "csv"}, "mtcars_id.csv.golden"},
		{"table missing values decimal comma", []string{"inspect", rdata("airquality_csv2.csv"), "--delimiter", ";", "--decimal-comma", "--missing", "NA",
			"--response", "Ozone", "--terms", "Solar.R, Wind, Temp", "--cutoffs", "size_adjusted"}, "airquality_csv2.table.golden"},
		// co2.csv is R's datasets::CO2 (uptake, conc, treatment) as
		// testdata/reference/co2_group_slopes.json holds it; stability.csv
		// the invented stability study of testdata/reference/pool; both
		// are checked against R in TestInspectFormMatchesR and
		// TestInspectPoolMatchesR.
		{"table groups", []string{"inspect", fixture("co2.csv"), "--response", "uptake", "--terms", "group(treatment), conc, group(treatment)*conc"}, "co2_groups.table.golden"},
		{"json groups", []string{"inspect", fixture("co2.csv"), "--response", "uptake", "--terms", "group(treatment), conc, group(treatment)*conc", "--format", "json"}, "co2_groups.json.golden"},
		{"table weighted groups", []string{"inspect", fixture("stability.csv"), "--response", "assay", "--terms", "group(batch), months, months*group(batch)", "--weights", "w"}, "stability_weighted.table.golden"},
		{"json weighted groups", []string{"inspect", fixture("stability.csv"), "--response", "assay", "--terms", "group(batch), months, months*group(batch)", "--weights", "w", "--format", "json"}, "stability_weighted.json.golden"},
		{"json weighted inverse", []string{"inspect", fixture("cars.csv"), "--response", "dist", "--terms", "speed", "--weights", "inverse(speed)", "--format", "json"}, "cars_inverse_speed.json.golden"},
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

func TestInspectHelp(t *testing.T) {
	for _, args := range [][]string{{"inspect", "--help"}, {"help", "inspect"}} {
		_, stderr, code := runPlumb(t, "", args...)
		if code != 0 {
			t.Errorf("%v: exit code %d, want 0", args, code)
		}
		for _, w := range []string{"Usage: plumb inspect", "-response", "-terms", "-no-intercept", "-format", "-delimiter",
			"-strict", "-alpha", "-cutoffs", "-cook-rule", "-outlier-test", "-fragility", "-max-removed", "-checkpoint",
			"-suggest", "-region", "-replicates", "never deletes or alters a measurement"} {
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
