package main

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"plumb/engine"
)

// --leave-out leaves the rows a list names out of the fit (the fit equals
// one of the file without them) and lists them with their notes.
func TestInspectLeaveOut(t *testing.T) {
	list := filepath.Join(t.TempDir(), "set-aside.txt")
	// cars.csv: line 1 is the header, so data row k is on line k+1.
	writeList(t, list, "# set aside by r.okafor\n49 stopwatch reset mid-run\n\ncars.csv:51\tbrake test, not a stop\n")
	out, stderr, code := runPlumb(t, "", "inspect", fixture("cars.csv"), "--response", "dist", "--terms", "speed", "--leave-out", list, "--format", "json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var rep struct {
		N            int
		Coefficients []struct{ Estimate float64 }
		LeftOut      []leftOutRow `json:"left_out"`
	}
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if rep.N != 48 {
		t.Fatalf("n = %d, want 48", rep.N)
	}
	want := []leftOutRow{
		{File: fixture("cars.csv"), Row: 49, Line: 50, Entry: list + ":2", Note: "stopwatch reset mid-run"},
		{File: fixture("cars.csv"), Row: 50, Line: 51, Entry: list + ":4", Note: "brake test, not a stop"},
	}
	if len(rep.LeftOut) != 2 || rep.LeftOut[0] != want[0] || rep.LeftOut[1] != want[1] {
		t.Errorf("left out %+v, want %+v", rep.LeftOut, want)
	}
	// The fit of the file without rows 49 and 50.
	f, err := os.Open(fixture("cars.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var speed, dist []float64
	for k, r := range recs[1:] {
		if k+1 == 49 || k+1 == 50 {
			continue
		}
		s, _ := strconv.ParseFloat(r[0], 64)
		d, _ := strconv.ParseFloat(r[1], 64)
		speed, dist = append(speed, s), append(dist, d)
	}
	m, _ := engine.NewModel("dist", []string{"speed"}, true)
	X, y, _ := m.Design(map[string][]float64{"speed": speed, "dist": dist})
	fit, err := engine.Refit(m, X, y)
	if err != nil {
		t.Fatal(err)
	}
	for i, c := range rep.Coefficients {
		if w := fit.Coef[i].Estimate; math.Abs(c.Estimate-w) > 1e-12*math.Max(1, math.Abs(w)) {
			t.Errorf("coefficient %d = %.15g, want %.15g", i, c.Estimate, w)
		}
	}

	// The table lists them on standard error and counts them.
	out, stderr, code = runPlumb(t, "", "inspect", fixture("cars.csv"), "--response", "dist", "--terms", "speed", "--leave-out", list)
	if code != 0 || !strings.Contains(out, "2 left out as the --leave-out list asks") ||
		!strings.Contains(stderr, "cars.csv:50: row 49 left out ("+list+":2): stopwatch reset mid-run") {
		t.Errorf("table: exit %d\n%s\n%s", code, out, stderr)
	}
}

func TestInspectLeaveOutErrors(t *testing.T) {
	dir := t.TempDir()
	tests := []struct{ name, list, want string }{
		{"no such row", "51\n", `set-aside.txt:1: "51" is no row of`},
		{"no such line", "cars.csv:1\n", `"cars.csv:1" is no row of`},
		{"another file", "feed.csv:12\n", `names feed.csv, not the inspected file`},
		{"not a reference", "row twelve\n", `"row": want a data row number or FILE:LINE`},
		{"twice", "3\ncars.csv:4\n", `set-aside.txt:2: "cars.csv:4" names the row`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			list := filepath.Join(dir, "set-aside.txt")
			writeList(t, list, tt.list)
			_, stderr, code := runPlumb(t, "", "inspect", fixture("cars.csv"), "--response", "dist", "--terms", "speed", "--leave-out", list)
			if code != 1 || !strings.Contains(stderr, tt.want) {
				t.Errorf("exit %d, stderr %q; want 1 and %q", code, stderr, tt.want)
			}
		})
	}
	_, stderr, code := runPlumb(t, "", "inspect", fixture("cars.csv"), "--response", "dist", "--terms", "speed", "--leave-out", filepath.Join(dir, "missing.txt"))
	if code != 1 || !strings.Contains(stderr, "missing.txt") {
		t.Errorf("missing list: exit %d, %q", code, stderr)
	}
}

func writeList(t *testing.T, p, s string) {
	t.Helper()
	if err := os.WriteFile(p, []byte(s), 0o644); err != nil {
		t.Fatal(err)
	}
}
