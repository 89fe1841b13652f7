package main

// Data sets shipped with R, as R's own writers save them, through plumb
// inspect, checked against R's lm. Source of every expected value: R
// (Debian's r-base-core), testdata/rdata/gen_rdata.R, which writes the CSV
// files and the *_lm.json fits.

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

var rdataDir = filepath.Join("..", "..", "testdata", "rdata")

func rdata(name string) string { return filepath.Join(rdataDir, name) }

// rFit is the part of a testdata/rdata/*_lm.json file the tests read.
type rFit struct {
	Source        string    `json:"source"`
	N             int       `json:"n"`
	Omitted       int       `json:"omitted"`
	Terms         []string  `json:"terms"`
	Estimate      []float64 `json:"estimate"`
	StdError      []float64 `json:"std_error"`
	Sigma         float64   `json:"sigma"`
	Rows          []int     `json:"rows"` // airquality: data row of each fitted row
	IDs           []string  `json:"ids"`  // mtcars: the car of each fitted row
	Fitted        []float64 `json:"fitted"`
	Leverage      []float64 `json:"leverage"`
	Cook          []float64 `json:"cooks_distance"`
	SubsetN       int       `json:"subset_n"`
	SubsetEsimate []float64 `json:"subset_estimate"`
}

func readRFit(t *testing.T, name string) rFit {
	t.Helper()
	b, err := os.ReadFile(rdata(name))
	if err != nil {
		t.Fatal(err)
	}
	var f rFit
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	return f
}

// nearR: relative 1e-9, absolute for values below 1 (fitted values near
// zero).
func nearR(got, want float64) bool {
	return math.Abs(got-want) <= 1e-9*math.Max(1, math.Abs(want))
}

// nearRel: relative 1e-9 (coefficients and their standard errors).
func nearRel(got, want float64) bool {
	return math.Abs(got-want) <= 1e-9*math.Abs(want)
}

func inspectJSONOf(t *testing.T, args ...string) inspectJSON {
	t.Helper()
	out, stderr, code := runPlumb(t, "", append(append([]string{"inspect"}, args...), "--format", "json")...)
	if code != 0 {
		t.Fatalf("exit %d; stderr:\n%s", code, stderr)
	}
	var got inspectJSON
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatal(err)
	}
	return got
}

func checkCoefficients(t *testing.T, got inspectJSON, want []float64, wantSE []float64) {
	t.Helper()
	if len(got.Coefficients) != len(want) {
		t.Fatalf("%d coefficients, want %d", len(got.Coefficients), len(want))
	}
	for i, c := range got.Coefficients {
		if !nearRel(*c.Estimate, want[i]) {
			t.Errorf("%s: estimate %.17g, R %.17g", c.Term, *c.Estimate, want[i])
		}
		if wantSE != nil && !nearRel(*c.StdError, wantSE[i]) {
			t.Errorf("%s: std error %.17g, R %.17g", c.Term, *c.StdError, wantSE[i])
		}
	}
}

// TestInspectAirqualityMissing: R's airquality (write.csv: NA for a
// missing reading; write.csv2: ';' and decimal commas) with --missing
// fits the 111 complete rows as R's lm does (na.omit); the 42 others are
// counted as missing, not listed as unreadable. The European file works
// with flags alone.
func TestInspectAirqualityMissing(t *testing.T) {
	want := readRFit(t, "airquality_lm.json") // R 4.2.2 lm, na.omit
	model := []string{"--response", "Ozone", "--terms", "Solar.R, Wind, Temp"}
	tests := []struct {
		name string
		args []string
	}{
		{"write.csv", []string{rdata("airquality.csv"), "--missing", "NA"}},
		{"write.csv2", []string{rdata("airquality_csv2.csv"), "--delimiter", ";", "--decimal-comma", "--missing", "NA"}},
		{"two tokens", []string{rdata("airquality.csv"), "--missing", "NA", "--missing", ""}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got := inspectJSONOf(t, append(tt.args, model...)...)
			if got.N != want.N || got.Missing != want.Omitted || len(got.Rejected) != 0 || got.RowsInFile != want.N+want.Omitted {
				t.Fatalf("n %d, missing %d, rejected %d, rows in file %d; R: n %d, %d omitted, none unreadable, %d rows",
					got.N, got.Missing, len(got.Rejected), got.RowsInFile, want.N, want.Omitted, want.N+want.Omitted)
			}
			checkCoefficients(t, got, want.Estimate, want.StdError)
			for i, r := range got.Rows {
				if r.Row != want.Rows[i] {
					t.Fatalf("fitted row %d is data row %d, R's is %d", i, r.Row, want.Rows[i])
				}
				if !nearR(*r.Fitted, want.Fitted[i]) {
					t.Errorf("row %d: fitted %.17g, R %.17g", r.Row, *r.Fitted, want.Fitted[i])
				}
			}
		})
	}
	t.Run("table says it in words", func(t *testing.T) {
		out, _, code := runPlumb(t, "", append([]string{"inspect", rdata("airquality.csv"), "--missing", "NA"}, model...)...)
		if code != 0 {
			t.Fatal(code)
		}
		// Ozone is missing in 37 rows; Solar.R in 7, 2 of them with Ozone
		// missing too (R: summary(airquality)), so 5 are first missing there.
		w := `111 of 153 data rows used; 42 left out for a missing value in a column the model uses (Ozone 37, Solar.R 5; missing means "NA")`
		if !strings.Contains(out, w) {
			t.Errorf("table lacks %q:\n%s", w, out[:min(len(out), 600)])
		}
	})
	t.Run("without --missing NA is unreadable", func(t *testing.T) {
		got := inspectJSONOf(t, append([]string{rdata("airquality.csv")}, model...)...)
		if got.N != want.N || got.Missing != 0 || len(got.Rejected) != want.Omitted {
			t.Fatalf("n %d, missing %d, rejected %d; want %d, 0, %d", got.N, got.Missing, len(got.Rejected), want.N, want.Omitted)
		}
		r := got.Rejected[0] // data row 5: Ozone and Solar.R are NA
		if r.Row != 5 || r.Line != 6 || r.Column != 1 || r.Field != "Ozone" || r.FieldNo != 1 {
			t.Errorf("first rejected = %+v, want row 5, line 6, column 1, Ozone, field 1", r)
		}
	})
	t.Run("a missing value in an unused column costs nothing", func(t *testing.T) {
		got := inspectJSONOf(t, rdata("airquality.csv"), "--missing", "NA", "--response", "Temp", "--terms", "Wind")
		if got.N != 153 || got.Missing != 0 {
			t.Errorf("n %d, missing %d; want 153 and 0 (Temp and Wind have no NA)", got.N, got.Missing)
		}
	})
}

// TestInspectMtcarsIDColumn: R's mtcars with its row names written as a
// column "model"; --id-column model labels every row with its car in the
// JSON, CSV and table, and the fit matches R's lm(mpg ~ wt + hp).
func TestInspectMtcarsIDColumn(t *testing.T) {
	want := readRFit(t, "mtcars_lm.json") // R 4.2.2 lm, hatvalues, cooks.distance
	args := []string{rdata("mtcars.csv"), "--response", "mpg", "--terms", "wt, hp", "--id-column", "model"}
	got := inspectJSONOf(t, args...)
	if got.N != want.N || got.IDColumn != "model" {
		t.Fatalf("n %d, id_column %q; want %d, model", got.N, got.IDColumn, want.N)
	}
	checkCoefficients(t, got, want.Estimate, want.StdError)
	for i, r := range got.Rows {
		if r.ID == nil || *r.ID != want.IDs[i] {
			t.Fatalf("row %d: id %v, R's row name %q", r.Row, r.ID, want.IDs[i])
		}
		if !nearR(*r.Fitted, want.Fitted[i]) || !nearR(*r.Leverage, want.Leverage[i]) || !nearR(*r.Cook, want.Cook[i]) {
			t.Errorf("%s: fitted %.17g, leverage %.17g, Cook %.17g; R %.17g, %.17g, %.17g",
				*r.ID, *r.Fitted, *r.Leverage, *r.Cook, want.Fitted[i], want.Leverage[i], want.Cook[i])
		}
	}

	t.Run("csv", func(t *testing.T) {
		out, _, code := runPlumb(t, "", append(append([]string{"inspect"}, args...), "--format", "csv")...)
		if code != 0 {
			t.Fatal(code)
		}
		lines := strings.Split(out, "\n")
		if !strings.HasPrefix(lines[0], "row,id,line,verdict,") {
			t.Errorf("csv header %q, want row,id,line,...", lines[0])
		}
		if !strings.HasPrefix(lines[1], "1,Mazda RX4,2,") || !strings.HasPrefix(lines[32], "32,Volvo 142E,33,") {
			t.Errorf("csv rows lack the car: %q ... %q", lines[1], lines[32])
		}
	})
	t.Run("table", func(t *testing.T) {
		out, _, code := runPlumb(t, "", append([]string{"inspect"}, args...)...)
		if code != 0 {
			t.Fatal(code)
		}
		// The worth-a-look list names the car; every row of the last
		// table carries it in a column named as the file names it.
		for _, w := range []string{`row 31 "Maserati Bora" (line 32): `, "  row  model  ", "   1  Mazda RX4  ", "  32  Volvo 142E  "} {
			if !strings.Contains(out, w) {
				t.Errorf("table lacks %q:\n%s", w, out)
			}
		}
	})
	t.Run("filter", func(t *testing.T) {
		// R: lm(mpg ~ wt + hp, subset = cyl %in% c(4, 6)).
		got := inspectJSONOf(t, append(args, "--filter", "cyl=4", "--filter", "cyl=6")...)
		if got.N != want.SubsetN || got.Filtered == nil || *got.Filtered != 32-want.SubsetN {
			t.Fatalf("n %d, filtered %v; want %d and %d", got.N, got.Filtered, want.SubsetN, 32-want.SubsetN)
		}
		checkCoefficients(t, got, want.SubsetEsimate, nil)
	})
}
