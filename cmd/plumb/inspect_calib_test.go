package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"plumb/engine"
)

// TestInspectAnswersMatchR runs --at through the whole command on
// thermo.csv (the 30 readable rows are the ketterby_thermocouple data)
// and compares each prediction with R's predict.lm(se.fit = TRUE,
// interval = "confidence" / "prediction", level, pred.var = sigma^2/m)
// as kept in testdata/reference/predict (Debian's r-base-core; regen.sh),
// at 1e-9 relative.
func TestInspectAnswersMatchR(t *testing.T) {
	raw, err := os.ReadFile(filepath.Join("..", "..", "testdata", "reference", "predict", "ketterby_thermocouple.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Points []struct {
			At         map[string]float64 `json:"at"`
			Level      float64            `json:"level"`
			Readings   int                `json:"readings"`
			Fit        float64            `json:"fit"`
			SEFit      float64            `json:"se_fit"`
			DF         int                `json:"df"`
			Confidence [2]float64         `json:"confidence"`
			Prediction [2]float64         `json:"prediction"`
		} `json:"points"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.Points) == 0 {
		t.Fatal("no reference points")
	}
	near := func(got, want float64) bool { return math.Abs(got-want) <= 1e-9*math.Max(math.Abs(want), 1e-3) }
	for _, p := range ref.Points {
		at := "emf_mv=" + strconv.FormatFloat(p.At["emf_mv"], 'g', -1, 64)
		out, stderr, code := runPlumb(t, "", "inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms,
			"--at", at, "--level", strconv.FormatFloat(p.Level, 'g', -1, 64), "--readings-averaged", strconv.Itoa(p.Readings), "--format", "json")
		if code != 0 {
			t.Fatalf("%s: exit %d: %s", at, code, stderr)
		}
		var got struct {
			Predictions []struct {
				At         map[string]float64 `json:"at"`
				Fitted     float64            `json:"fitted"`
				SEFit      float64            `json:"se_fit"`
				Confidence [2]float64         `json:"confidence"`
				Prediction [2]float64         `json:"prediction"`
				Level      float64            `json:"level"`
				Readings   int                `json:"readings"`
				DF         int                `json:"df"`
			} `json:"predictions"`
		}
		if err := json.Unmarshal([]byte(out), &got); err != nil {
			t.Fatal(err)
		}
		if len(got.Predictions) != 1 {
			t.Fatalf("%s: %d predictions, want 1", at, len(got.Predictions))
		}
		g := got.Predictions[0]
		name := at + " level " + strconv.FormatFloat(p.Level, 'g', -1, 64) + " m " + strconv.Itoa(p.Readings)
		if g.Level != p.Level || g.Readings != p.Readings || g.DF != p.DF || g.At["emf_mv"] != p.At["emf_mv"] {
			t.Errorf("%s: level %v readings %d df %d at %v, want %v %d %d %v", name, g.Level, g.Readings, g.DF, g.At, p.Level, p.Readings, p.DF, p.At)
		}
		for _, c := range []struct {
			what      string
			got, want float64
		}{
			{"fitted", g.Fitted, p.Fit}, {"se_fit", g.SEFit, p.SEFit},
			{"confidence lo", g.Confidence[0], p.Confidence[0]}, {"confidence hi", g.Confidence[1], p.Confidence[1]},
			{"prediction lo", g.Prediction[0], p.Prediction[0]}, {"prediction hi", g.Prediction[1], p.Prediction[1]},
		} {
			if !near(c.got, c.want) {
				t.Errorf("%s: %s = %.17g, R %.17g", name, c.what, c.got, c.want)
			}
		}
	}
}

// TestInspectInverseLine checks --reading on a straight line against
// Fieller's interval in closed form (NIST/SEMATECH e-Handbook §4.5.2.1;
// Fieller 1954): with b0, b1, s, t and x̄, Sxx of the data, the ends are
// the roots in x of (y0 - b0 - b1 x)² = t² s² (1/m + 1/n + (x - x̄)²/Sxx).
// The data: cars.csv (R's cars), dist on speed.
func TestInspectInverseLine(t *testing.T) {
	out, stderr, code := runPlumb(t, "", "inspect", fixture("cars.csv"), "--response", "dist", "--terms", "speed",
		"--reading", "40", "--readings-averaged", "2", "--level", "0.9", "--format", "json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var got struct {
		N            int     `json:"n"`
		Sigma        float64 `json:"sigma"`
		Coefficients []struct {
			Estimate float64 `json:"estimate"`
		} `json:"coefficients"`
		Inverse []struct {
			Reading  float64    `json:"reading"`
			Estimate float64    `json:"estimate"`
			U        float64    `json:"standard_uncertainty"`
			Interval [2]float64 `json:"interval"`
			Shape    string     `json:"shape"`
			Status   string     `json:"status"`
			Note     string     `json:"note"`
			DF       int        `json:"df"`
			Readings int        `json:"readings"`
		} `json:"inverse"`
	}
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatal(err)
	}
	if len(got.Inverse) != 1 {
		t.Fatalf("%d inverse answers, want 1", len(got.Inverse))
	}
	inv := got.Inverse[0]
	if inv.Status != "unique" || inv.Shape != "bounded" || inv.Note != "" || inv.Readings != 2 {
		t.Fatalf("status %q shape %q note %q readings %d", inv.Status, inv.Shape, inv.Note, inv.Readings)
	}
	// The speeds of R's cars, read from the file.
	raw, err := os.ReadFile(fixture("cars.csv"))
	if err != nil {
		t.Fatal(err)
	}
	var xs []float64
	for i, l := range strings.Split(strings.TrimSpace(string(raw)), "\n") {
		if i == 0 {
			continue
		}
		v, err := strconv.ParseFloat(strings.Split(strings.TrimSpace(l), ",")[0], 64)
		if err != nil {
			t.Fatal(err)
		}
		xs = append(xs, v)
	}
	n := float64(len(xs))
	if int(n) != got.N {
		t.Fatalf("read %d speeds, fit has %d rows", len(xs), got.N)
	}
	xbar, sxx := 0.0, 0.0
	for _, x := range xs {
		xbar += x / n
	}
	for _, x := range xs {
		sxx += (x - xbar) * (x - xbar)
	}
	b0, b1, s, y0, m := got.Coefficients[0].Estimate, got.Coefficients[1].Estimate, got.Sigma, inv.Reading, 2.0
	tq := engine.TQuantile(0.95, float64(inv.DF))
	// (b1² - t²s²/Sxx) x² - 2 (b1 (y0 - b0) - t²s² x̄/Sxx) x + (y0-b0)² - t²s²(1/m + 1/n + x̄²/Sxx) = 0
	k := tq * tq * s * s
	a := b1*b1 - k/sxx
	bb := -2 * (b1*(y0-b0) - k*xbar/sxx)
	c := (y0-b0)*(y0-b0) - k*(1/m+1/n+xbar*xbar/sxx)
	disc := math.Sqrt(bb*bb - 4*a*c)
	lo, hi := (-bb-disc)/(2*a), (-bb+disc)/(2*a)
	xhat := (y0 - b0) / b1
	u := s * math.Sqrt(1/m+1/n+(xhat-xbar)*(xhat-xbar)/sxx) / math.Abs(b1)
	for _, c := range []struct {
		what      string
		got, want float64
	}{{"estimate", inv.Estimate, xhat}, {"u", inv.U, u}, {"lower", inv.Interval[0], lo}, {"upper", inv.Interval[1], hi}} {
		if math.Abs(c.got-c.want) > 1e-9*math.Abs(c.want) {
			t.Errorf("%s = %.15g, Fieller's closed form %.15g", c.what, c.got, c.want)
		}
	}
}

// TestInspectAnswerErrors: bad answer flags are usage errors (exit 2)
// that name the flag.
func TestInspectAnswerErrors(t *testing.T) {
	base := []string{"inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms}
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"at not a number", []string{"--at", "emf_mv=hot"}, "--at"},
		{"at not a pair", []string{"--at", "10"}, "--at"},
		{"at unknown column", []string{"--at", "emf_mv=1,bath_c=10"}, `"bath_c" is not a predictor column`},
		{"at missing column", []string{"--at", "bath_c=10"}, `no value for "emf_mv"`},
		{"at twice", []string{"--at", `"emf_mv"=1,emf_mv=2`}, "twice"},
		{"reading not a number", []string{"--reading", "x"}, "--reading"},
		{"level", []string{"--level", "95"}, "--level"},
		{"averaged", []string{"--readings-averaged", "0"}, "--readings-averaged"},
		{"unit of another column", []string{"--unit", "bath=°C"}, "--unit"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			_, stderr, code := runPlumb(t, "", append(append([]string{}, base...), tt.args...)...)
			if code != 2 || !strings.Contains(stderr, tt.want) {
				t.Errorf("exit %d, stderr %q; want exit 2 naming %q", code, stderr, tt.want)
			}
		})
	}
	// Inverse prediction of a model in two columns is refused.
	_, stderr, code := runPlumb(t, "", "inspect", fixture("stackloss.csv"), "--response", "stack.loss",
		"--terms", "Air.Flow, Water.Temp", "--reading", "20")
	if code != 2 || !strings.Contains(stderr, "line or polynomial in one predictor column") {
		t.Errorf("two-column inverse: exit %d, stderr %q", code, stderr)
	}
}

// With --format csv the answers go to standard error in words and the
// rows to standard output unchanged.
func TestInspectAnswersCSV(t *testing.T) {
	plain, _, code := runPlumb(t, "", "inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms, "--format", "csv")
	if code != 0 {
		t.Fatal(code)
	}
	out, stderr, code := runPlumb(t, "", "inspect", fixture("thermo.csv"), "--response", "temp_c", "--terms", thermoTerms, "--format", "csv",
		"--at", "emf_mv=10", "--reading", "150", "--unit", "temp_c=°C")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if out != plain {
		t.Error("--at changed the csv rows")
	}
	for _, want := range []string{"At emf_mv = 10 the curve gives temp_c = 234.8 °C", "A reading of temp_c = 150 °C stands for emf_mv = 6.311"} {
		if !strings.Contains(stderr, want) {
			t.Errorf("standard error lacks %q:\n%s", want, stderr)
		}
	}
}
