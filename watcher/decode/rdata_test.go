package decode_test

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumb/engine"
	"plumb/watcher/decode"
)

// rFit is the fit R's lm gives, as testdata/rdata/gen_rdata.R writes it.
type rFit struct {
	N        int       `json:"n"`
	Omitted  int       `json:"omitted"`
	Estimate []float64 `json:"estimate"`
	StdError []float64 `json:"std_error"`
	Sigma    float64   `json:"sigma"`
	RSquared float64   `json:"r_squared"`
}

// decodeFile decodes a whole file and sorts its records into good rows,
// rows with a missing value and refused rows.
func decodeFile(t *testing.T, name string, d decode.Dialect, numeric []string) (good [][]float64, missing []*decode.RowError, refused []*decode.RowError) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "rdata", name))
	if err != nil {
		t.Fatal(err)
	}
	dec := decode.NewDecoder(name, d)
	if err := dec.Select(numeric, nil); err != nil {
		t.Fatal(err)
	}
	if _, err := dec.Feed(b, true, func(r decode.Record) error {
		switch {
		case r.Err != nil:
			refused = append(refused, r.Err)
		case r.Missing != nil:
			missing = append(missing, r.Missing)
		default:
			good = append(good, append([]float64(nil), r.Values...))
		}
		return nil
	}); err != nil {
		t.Fatal(err)
	}
	return good, missing, refused
}

// TestAirqualityMissingValues: R's airquality as R's write.csv and
// write.csv2 save it, with "NA" as the missing-value token: 42 rows hold a
// missing value in a column of the model and are left out, none is
// refused, and the fit of the 111 others is R's lm fit (its default
// na.omit), to 1e-10 relative. Source of the reference values: R,
// testdata/rdata/airquality_lm.json (gen_rdata.R).
func TestAirqualityMissingValues(t *testing.T) {
	var want rFit
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", "rdata", "airquality_lm.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &want); err != nil {
		t.Fatal(err)
	}
	cols := []string{"Ozone", "Solar.R", "Wind", "Temp"}
	for _, tc := range []struct {
		file string
		d    decode.Dialect
	}{
		{"airquality.csv", decode.Dialect{Missing: []string{"NA"}}},
		{"airquality_csv2.csv", decode.Dialect{Delimiter: ';', DecimalComma: true, Missing: []string{"NA", ""}}},
	} {
		t.Run(tc.file, func(t *testing.T) {
			good, missing, refused := decodeFile(t, tc.file, tc.d, cols)
			if len(refused) != 0 {
				t.Fatalf("%d rows refused, first %v; a missing value is not an error", len(refused), refused[0])
			}
			if len(good) != want.N || len(missing) != want.Omitted {
				t.Fatalf("%d good rows, %d with a missing value; R: %d and %d", len(good), len(missing), want.N, want.Omitted)
			}
			m := missing[0] // line 6: "NA,NA,14.3,56,5,5"
			if m.Line != 6 || m.Name != "Ozone" || m.Field != 1 || m.Column != 1 || !errors.Is(m, decode.ErrMissing) ||
				!strings.HasPrefix(m.Error(), tc.file+`:6:1: column "Ozone" (field 1): missing value: "NA"`) {
				t.Errorf("first missing cell %+v (%v)", m, m)
			}
			data := map[string][]float64{}
			for _, row := range good {
				for j, c := range cols {
					data[c] = append(data[c], row[j])
				}
			}
			model, err := engine.NewModel("Ozone", []string{"Solar.R", "Wind", "Temp"}, true)
			if err != nil {
				t.Fatal(err)
			}
			X, y, err := model.Design(data)
			if err != nil {
				t.Fatal(err)
			}
			fit, err := engine.Refit(model, X, y)
			if err != nil {
				t.Fatal(err)
			}
			close := func(what string, got, want float64) {
				if math.Abs(got-want) > 1e-10*math.Abs(want) {
					t.Errorf("%s = %.17g, R %.17g", what, got, want)
				}
			}
			for i, c := range fit.Coef {
				close(c.Term+" estimate", c.Estimate, want.Estimate[i])
				close(c.Term+" std error", c.StdError, want.StdError[i])
			}
			close("sigma", fit.Sigma, want.Sigma)
			close("R²", fit.RSquared, want.RSquared)
		})
	}
}

// TestMissingOnlyInUsedColumns: missing values in columns the model does
// not read cost nothing (every row is good), and a refused cell wins over
// a missing one in the same row.
func TestMissingOnlyInUsedColumns(t *testing.T) {
	good, missing, refused := decodeFile(t, "airquality.csv", decode.Dialect{Missing: []string{"NA"}}, []string{"Wind", "Temp"})
	if len(good) != 153 || len(missing) != 0 || len(refused) != 0 {
		t.Errorf("Wind, Temp: %d good, %d missing, %d refused; want 153, 0, 0", len(good), len(missing), len(refused))
	}
	_, _, refused = decodeFile(t, "airquality.csv", decode.Dialect{}, []string{"Ozone", "Wind"})
	if len(refused) != 37 || !errors.Is(refused[0], decode.ErrNotNumber) {
		t.Errorf("without tokens: %d refused, want the 37 NA ozone rows as not a number", len(refused))
	}
	dec := decode.NewDecoder("mixed.csv", decode.Dialect{Missing: []string{"NA", ""}})
	if err := dec.Select([]string{"a", "b", "c"}, nil); err != nil {
		t.Fatal(err)
	}
	var recs []decode.Record
	in := "a,b,c\nNA,x,1\n1, ,2\n1,\"NA\",  NA \n"
	if _, err := dec.Feed([]byte(in), true, func(r decode.Record) error { recs = append(recs, r); return nil }); err != nil {
		t.Fatal(err)
	}
	if len(recs) != 3 || recs[0].Err == nil || recs[0].Missing != nil || !errors.Is(recs[0].Err, decode.ErrNotNumber) {
		t.Fatalf("row 2: %+v; want refused for the bad cell, not missing", recs[0])
	}
	if r := recs[1]; r.Err != nil || r.Missing == nil || r.Missing.Name != "b" || !math.IsNaN(r.Values[1]) || r.Values[2] != 2 {
		t.Errorf("row 3 (blank cell): %+v", r)
	}
	if r := recs[2]; r.Err != nil || r.Missing == nil || r.Missing.Name != "b" || r.Missing.Column != 3 || !math.IsNaN(r.Values[2]) {
		t.Errorf("row 4 (quoted and spaced tokens): %+v %v", r, r.Missing)
	}
	if err := (decode.Dialect{Missing: []string{"n,a"}}).Validate(); !errors.Is(err, decode.ErrDialect) {
		t.Errorf("token holding the delimiter: %v", err)
	}
}
