package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestInspectGroupsWithRowOptions: a model with a group term read with an
// id column, a filter, missing values (in a number cell and in a group
// label) and a --leave-out list fits exactly as the file holding only the
// rows kept, and counts and names what it left out. Invented data.
func TestInspectGroupsWithRowOptions(t *testing.T) {
	dir := t.TempDir()
	// Line 1 header; data row k on line k+1.
	const full = "sample;site;y;x;lot\n" +
		"s01;north;1,0;1;A\n" +
		"s02;north;2,1;2;B\n" +
		"s03;north;2,9;3;A\n" +
		"s04;south;9,9;4;B\n" + // filtered out
		"s05;north;NA;5;A\n" + // missing number
		"s06;north;4,2;4;NA\n" + // missing group label
		"s07;north;5,0;5;A\n" +
		"s08;north;5,8;6;B\n" +
		"s09;north;7,3;7;A\n" +
		"s10;north;30;8;B\n" + // left out by the list
		"s11;north;8,1;8;B\n" +
		"s12;north;9,2;9;A\n"
	const kept = "sample;site;y;x;lot\n" +
		"s01;north;1,0;1;A\n" +
		"s02;north;2,1;2;B\n" +
		"s03;north;2,9;3;A\n" +
		"s07;north;5,0;5;A\n" +
		"s08;north;5,8;6;B\n" +
		"s09;north;7,3;7;A\n" +
		"s11;north;8,1;8;B\n" +
		"s12;north;9,2;9;A\n"
	write := func(name, body string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	fullPath, keptPath := write("full.csv", full), write("kept.csv", kept)
	list := write("aside.txt", "10 probe left in air\n")
	type report struct {
		N            int
		Missing      int  `json:"missing"`
		Filtered     *int `json:"filtered"`
		Coefficients []struct {
			Term     string
			Estimate float64
		}
		LeftOut []leftOutRow `json:"left_out"`
		Rows    []struct {
			Line int
			ID   string `json:"id"`
		}
	}
	run := func(args ...string) report {
		t.Helper()
		base := []string{"inspect", "--delimiter", ";", "--decimal-comma", "--missing", "NA",
			"--response", "y", "--terms", "x, group(lot)", "--id-column", "sample", "--format", "json"}
		out, stderr, code := runPlumb(t, "", append(base, args...)...)
		if code != 0 {
			t.Fatalf("exit %d: %s", code, stderr)
		}
		var r report
		if err := json.Unmarshal([]byte(out), &r); err != nil {
			t.Fatal(err)
		}
		return r
	}
	got := run(fullPath, "--filter", "site=north", "--leave-out", list)
	want := run(keptPath)
	if got.N != 8 || got.Missing != 2 || got.Filtered == nil || *got.Filtered != 1 || len(got.LeftOut) != 1 || got.LeftOut[0].Row != 10 {
		t.Fatalf("n %d missing %d filtered %v left out %+v; want 8, 2, 1 and row 10", got.N, got.Missing, got.Filtered, got.LeftOut)
	}
	if len(got.Coefficients) != 3 || got.Coefficients[2].Term != "lot=B" {
		t.Fatalf("coefficients %+v; want intercept, x, lot=B", got.Coefficients)
	}
	for i, c := range got.Coefficients {
		w := want.Coefficients[i]
		if c.Term != w.Term || math.Abs(c.Estimate-w.Estimate) > 1e-12*math.Max(1, math.Abs(w.Estimate)) {
			t.Errorf("coefficient %d: %s %v, want %s %v (fit of the kept rows)", i, c.Term, c.Estimate, w.Term, w.Estimate)
		}
	}
	var ids []string
	for _, r := range got.Rows {
		ids = append(ids, r.ID)
	}
	if wantIDs := []string{"s01", "s02", "s03", "s07", "s08", "s09", "s11", "s12"}; !slices.Equal(ids, wantIDs) {
		t.Errorf("row ids %v, want %v", ids, wantIDs)
	}
	// The table says where the missing values were found.
	out, stderr, code := runPlumb(t, "", "inspect", fullPath, "--delimiter", ";", "--decimal-comma", "--missing", "NA",
		"--response", "y", "--terms", "x, group(lot)", "--filter", "site=north")
	if code != 0 {
		t.Fatalf("table: exit %d: %s", code, stderr)
	}
	for _, w := range []string{"y 1", "lot 1"} {
		if !strings.Contains(out, w) {
			t.Errorf("table lacks %q in its missing-value words:\n%s", w, out)
		}
	}
}

// TestInspectWeightedPredictionMatchesR: with a variance function as
// weights, a new reading at the point has the weight the function gives
// there, so its prediction interval widens with it. R 4.x:
//
//	f <- lm(dist ~ speed, data = cars, weights = 1/speed)
//	predict(f, data.frame(speed = 10), interval = "prediction", weights = 1/10)
//	fit 23.3621182558685, lwr -1.2797097543054, upr 48.0039462660424
//	predict(f, data.frame(speed = 10), se.fit = TRUE)$se.fit 2.1942590985218
func TestInspectWeightedPredictionMatchesR(t *testing.T) {
	out, stderr, code := runPlumb(t, "", "inspect", fixture("cars.csv"), "--response", "dist", "--terms", "speed",
		"--weights", "inverse(speed)", "--at", "speed=10", "--format", "json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var rep struct {
		Predictions []struct {
			Fitted     float64    `json:"fitted"`
			SEFit      float64    `json:"se_fit"`
			Prediction [2]float64 `json:"prediction"`
		} `json:"predictions"`
	}
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if len(rep.Predictions) != 1 {
		t.Fatalf("predictions %+v", rep.Predictions)
	}
	p := rep.Predictions[0]
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"fit", p.Fitted, 23.3621182558685},
		{"se.fit", p.SEFit, 2.1942590985218},
		{"lwr", p.Prediction[0], -1.2797097543054},
		{"upr", p.Prediction[1], 48.0039462660424},
	} {
		if math.Abs(c.got-c.want) > 1e-9*math.Max(1, math.Abs(c.want)) {
			t.Errorf("%s = %.15g, R gives %.15g", c.name, c.got, c.want)
		}
	}
}
