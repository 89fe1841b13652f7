package engine_test

// Reference values from R (Debian's r-base-core): predict.lm(se.fit =
// TRUE, interval = "confidence" / "prediction", level, pred.var =
// sigma^2/m) on the data sets of testdata/reference/ (R's datasets package
// and the invented calibration-bench sets), at new points inside the data,
// at data points and beyond the data, levels 0.95 and 0.99, one reading
// and the mean of four. testdata/reference/gen_influence.R writes them to
// testdata/reference/predict/ and testdata/reference/regen.sh proves they
// are still what R says. Tolerance: relTol (1e-9) as in rgolden_test.go.

import (
	"encoding/json"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"testing"

	"plumb/engine"
)

type rPredictCase struct {
	Source            string               `json:"source"`
	RVersion          string               `json:"r_version"`
	Dataset           string               `json:"dataset"`
	Formula           string               `json:"formula"`
	Response          string               `json:"response"`
	ResponseTransform string               `json:"response_transform"`
	Terms             []string             `json:"terms"`
	Intercept         bool                 `json:"intercept"`
	Data              map[string][]float64 `json:"data"`
	Points            []struct {
		At            map[string]float64 `json:"at"`
		Level         float64            `json:"level"`
		Readings      int                `json:"readings"`
		Fit           float64            `json:"fit"`
		SEFit         float64            `json:"se_fit"`
		DF            int                `json:"df"`
		ResidualScale float64            `json:"residual_scale"`
		Confidence    [2]float64         `json:"confidence"`
		Prediction    [2]float64         `json:"prediction"`
	} `json:"points"`
}

func loadRPredictCases(tb testing.TB) []rPredictCase {
	tb.Helper()
	files, err := filepath.Glob(filepath.Join("..", "testdata", "reference", "predict", "*.json"))
	if err != nil {
		tb.Fatal(err)
	}
	if len(files) < 9 {
		tb.Fatalf("found %d prediction reference files, want 9 (run testdata/reference/regen.sh)", len(files))
	}
	var cases []rPredictCase
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			tb.Fatal(err)
		}
		var c rPredictCase
		if err := json.Unmarshal(b, &c); err != nil {
			tb.Fatalf("%s: %v", f, err)
		}
		if !strings.HasPrefix(c.RVersion, "R version") || c.Source == "" || c.Formula == "" || len(c.Points) == 0 {
			tb.Fatalf("%s: header must name the source, the R version and the formula, and list points", f)
		}
		cases = append(cases, c)
	}
	return cases
}

// TestRPredict compares PredictAt with R's predict.lm: fitted value,
// standard error of the fit, and both intervals, for every point, level
// and number of readings.
func TestRPredict(t *testing.T) {
	for _, c := range loadRPredictCases(t) {
		t.Run(c.Dataset, func(t *testing.T) {
			f, _ := fitCase(t, rCase{Dataset: c.Dataset, Response: c.Response, ResponseTransform: c.ResponseTransform,
				Terms: c.Terms, Intercept: c.Intercept, Data: c.Data, P: len(c.Terms) + b2i(c.Intercept)})
			var got, want [6][]float64
			var labels []string
			for _, pt := range c.Points {
				if pt.DF != f.DF {
					t.Fatalf("df = %d, R has %d", f.DF, pt.DF)
				}
				compareScalar(t, "residual_scale", f.Sigma, pt.ResidualScale)
				p, err := f.PredictAt(pt.At, engine.IntervalOptions{Level: pt.Level, Readings: pt.Readings})
				if err != nil {
					t.Fatalf("PredictAt(%v): %v", pt.At, err)
				}
				if p.Level != pt.Level || p.Readings != pt.Readings || p.DF != pt.DF {
					t.Errorf("PredictAt(%v) reports level %v, %d readings, df %d; asked %v, %d (df %d)",
						pt.At, p.Level, p.Readings, p.DF, pt.Level, pt.Readings, pt.DF)
				}
				g := [6]float64{p.Fitted, p.SE, p.Confidence.Lo, p.Confidence.Hi, p.Prediction.Lo, p.Prediction.Hi}
				w := [6]float64{pt.Fit, pt.SEFit, pt.Confidence[0], pt.Confidence[1], pt.Prediction[0], pt.Prediction[1]}
				for k := range g {
					got[k] = append(got[k], g[k])
					want[k] = append(want[k], w[k])
				}
				labels = append(labels, formatAt(pt.At, pt.Level, pt.Readings))
			}
			// One scale for the fitted values and the bounds (they share
			// units and come out of the same arithmetic); the standard
			// errors on their own.
			var all []float64
			for _, k := range []int{0, 2, 3, 4, 5} {
				all = append(all, want[k]...)
			}
			m := maxAbs(all)
			for k, name := range []string{"fit", "se_fit", "confidence.lo", "confidence.hi", "prediction.lo", "prediction.hi"} {
				mk := m
				if k == 1 {
					mk = maxAbs(want[1])
				}
				for i := range want[k] {
					if !closeTo(got[k][i], want[k][i], mk) {
						t.Errorf("%s at %s = %.17g, R gives %.17g", name, labels[i], got[k][i], want[k][i])
					}
				}
			}
		})
	}
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

func formatAt(at map[string]float64, level float64, m int) string {
	var s []string
	for k, v := range at {
		s = append(s, k+"="+strconv.FormatFloat(v, 'g', -1, 64))
	}
	sort.Strings(s)
	return "{" + strings.Join(s, ",") + "} level " + strconv.FormatFloat(level, 'g', -1, 64) + " m " + strconv.Itoa(m)
}
