package daemon

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/web"
	"plumb/engine"
)

const calibModel = `
[[model]]
name = "cal"
folder = "in"
response = "y"
terms = ["x"]
units = { y = "°C", x = "mV" }
[model.fragility]
enabled = false
[model.calibration]
predict_at = [{ x = 5.0 }]
invert = [4.5, 100.0]
readings_averaged = 2
level = 0.9
[[model.checkpoint]]
name = "hot end"
at = { x = 9.0 }
tolerance = 10.0
[model.alerts.drift]
baseline_rows = 50
k = 3.0
`

// feedShifted writes n rows of y = 2 + shift + 0.5x + noise.
func feedShifted(t testing.TB, path string, rng *rand.Rand, first, n int, shift float64) {
	t.Helper()
	f, err := os.OpenFile(path, os.O_CREATE|os.O_WRONLY|os.O_APPEND, 0o644)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var b strings.Builder
	if first == 0 {
		b.WriteString("id,x,y\n")
	}
	for i := first; i < first+n; i++ {
		x := float64(i%50) / 5
		fmt.Fprintf(&b, "%d,%g,%g\n", i, x, 2+shift+0.5*x+0.1*rng.NormFloat64())
	}
	if _, err := f.WriteString(b.String()); err != nil {
		t.Fatal(err)
	}
}

// TestCalibrationAnswersAndDriftShift: each refresh records the
// configured predictions and inverse predictions in the fit history,
// equal to the engine's on the refresh's fit; the API's answers are the
// engine's; the drift alert states the shift at the checkpoint in the
// response's units with its standard error (engine.ShiftAt).
func TestCalibrationAnswersAndDriftShift(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, calibModel)
	if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(dir, "in", "a.csv")
	rng := rand.New(rand.NewPCG(7, 7))
	feedShifted(t, file, rng, 0, 50, 0)
	r := start(t, c)
	ctx := context.Background()
	m := r.d.models["cal"]
	waitFor(t, "a fit of 50 rows", func() bool {
		f, err := r.d.store.LastFit(ctx, "cal")
		if err != nil || f.N != 50 {
			return false
		}
		// The refresh records the fit, then makes it the model's.
		m.mu.Lock()
		defer m.mu.Unlock()
		return m.ref.res != nil && m.ref.res.Fit.N == 50
	})

	// The fit history holds the answers of the fit it records.
	m.mu.Lock()
	fit := m.ref.res.Fit
	m.mu.Unlock()
	rec, err := r.d.store.LastFit(ctx, "cal")
	if err != nil {
		t.Fatal(err)
	}
	var detail struct {
		Predictions []view.Prediction `json:"predictions"`
		Inverse     []view.Inverse    `json:"inverse"`
	}
	if err := json.Unmarshal([]byte(rec.Detail), &detail); err != nil {
		t.Fatal(err)
	}
	o := engine.IntervalOptions{Level: 0.9, Readings: 2}
	want, err := fit.PredictAt(map[string]float64{"x": 5}, o)
	if err != nil {
		t.Fatal(err)
	}
	if len(detail.Predictions) != 1 {
		t.Fatalf("fit record holds %d predictions, want 1: %s", len(detail.Predictions), rec.Detail)
	}
	p := detail.Predictions[0]
	if float64(p.Fitted) != want.Fitted || float64(p.SEFit) != want.SE || float64(p.Prediction[0]) != want.Prediction.Lo ||
		float64(p.Confidence[1]) != want.Confidence.Hi || float64(p.Level) != 0.9 || p.Readings != 2 || p.DF != 48 {
		t.Errorf("recorded prediction %+v, engine %+v", p, want)
	}
	inv, err := fit.Invert(4.5, o)
	if err != nil {
		t.Fatal(err)
	}
	if len(detail.Inverse) != 2 {
		t.Fatalf("fit record holds %d inverse answers, want 2", len(detail.Inverse))
	}
	if g := detail.Inverse[0]; float64(g.Estimate) != inv.Estimate || float64(g.StandardUncertainty) != inv.StandardUncertainty ||
		float64(g.Interval[0]) != inv.Interval.Lo || float64(g.Interval[1]) != inv.Interval.Hi || g.Status != "unique" {
		t.Errorf("recorded inverse %+v, engine %+v", g, inv)
	}
	if g := detail.Inverse[1]; g.Status != "above-range" || !math.IsNaN(float64(g.Estimate)) || g.Note == "" {
		t.Errorf("reading 100, far above the curve: %+v", g)
	}

	// The fit history reads them back.
	fvs, err := r.d.View().Fits(ctx, "cal", 0, 100)
	if err != nil || len(fvs) == 0 {
		t.Fatalf("fits: %d, %v", len(fvs), err)
	}
	if last := fvs[len(fvs)-1]; len(last.Predictions) != 1 || float64(last.Predictions[0].Fitted) != want.Fitted ||
		len(last.Inverse) != 2 || float64(last.Inverse[0].Estimate) != inv.Estimate || !math.IsNaN(float64(last.Inverse[1].Estimate)) {
		t.Errorf("fit history's answers: %+v %+v", last.Predictions, last.Inverse)
	}

	// The model's picture carries the answers and the units.
	md, err := r.d.View().Model(ctx, "cal")
	if err != nil {
		t.Fatal(err)
	}
	if len(md.Predictions) != 1 || float64(md.Predictions[0].Fitted) != want.Fitted || len(md.Inverse) != 2 || md.Units["x"] != "mV" {
		t.Errorf("model detail: predictions %+v inverse %d units %v", md.Predictions, len(md.Inverse), md.Units)
	}
	if c, ok := md.Curve("x"); !ok || len(c.PredLower) != len(c.X) || !(c.PredLower[0] < c.Lower[0]) || !(c.PredUpper[0] > c.Upper[0]) {
		t.Errorf("curve lacks a prediction band wider than the confidence band: %+v", c)
	}

	// The API's answers are the engine's on the current fit.
	src := r.d.View().(view.Answerer)
	ans, err := src.Answer(ctx, "cal", view.Question{At: []map[string]float64{{"x": 7.5}}, Readings: []float64{5.1}, Level: 0.99, Averaged: 3})
	if err != nil {
		t.Fatal(err)
	}
	o = engine.IntervalOptions{Level: 0.99, Readings: 3}
	wp, _ := fit.PredictAt(map[string]float64{"x": 7.5}, o)
	wi, _ := fit.Invert(5.1, o)
	if len(ans.Predictions) != 1 || float64(ans.Predictions[0].Fitted) != wp.Fitted || float64(ans.Predictions[0].Prediction[1]) != wp.Prediction.Hi {
		t.Errorf("answer %+v, engine %+v", ans.Predictions, wp)
	}
	if len(ans.Inverse) != 1 || float64(ans.Inverse[0].Estimate) != wi.Estimate || float64(ans.Inverse[0].Interval[0]) != wi.Interval.Lo {
		t.Errorf("answer %+v, engine %+v", ans.Inverse, wi)
	}
	if ans.Units["y"] != "°C" || ans.FitID != rec.ID {
		t.Errorf("units %v fit %d, want °C and %d", ans.Units, ans.FitID, rec.ID)
	}
	// Over HTTP: the same numbers, undefined ones null.
	h := web.New(r.d.View(), web.Options{})
	get := func(path string) (int, string) {
		rec := httptest.NewRecorder()
		h.ServeHTTP(rec, httptest.NewRequest("GET", path, nil))
		return rec.Code, rec.Body.String()
	}
	code, body := get("/api/v1/models/cal/predict?at=x=7.5&level=0.99&readings=3")
	var hp view.Answers
	if err := json.Unmarshal([]byte(body), &hp); code != 200 || err != nil || len(hp.Predictions) != 1 {
		t.Fatalf("predict: %d %s (%v)", code, body, err)
	}
	if g := hp.Predictions[0]; float64(g.Fitted) != wp.Fitted || float64(g.SEFit) != wp.SE || float64(g.Confidence[0]) != wp.Confidence.Lo ||
		float64(g.Prediction[0]) != wp.Prediction.Lo || float64(g.Prediction[1]) != wp.Prediction.Hi || g.Readings != 3 || float64(g.Level) != 0.99 {
		t.Errorf("GET predict %+v, engine %+v", g, wp)
	}
	code, body = get("/api/v1/models/cal/inverse?reading=5.1&reading=100&level=0.99&readings=3")
	var hi view.Answers
	if err := json.Unmarshal([]byte(body), &hi); code != 200 || err != nil || len(hi.Inverse) != 2 {
		t.Fatalf("inverse: %d %s (%v)", code, body, err)
	}
	if g := hi.Inverse[0]; float64(g.Estimate) != wi.Estimate || float64(g.StandardUncertainty) != wi.StandardUncertainty ||
		float64(g.Interval[0]) != wi.Interval.Lo || float64(g.Interval[1]) != wi.Interval.Hi {
		t.Errorf("GET inverse %+v, engine %+v", g, wi)
	}
	if !strings.Contains(body, `"estimate":null`) || !strings.Contains(body, `"status":"above-range"`) {
		t.Errorf("reading 100: want a null estimate and status above-range: %s", body)
	}
	for _, c := range []struct {
		path string
		code int
	}{
		{"/api/v1/models/cal/predict?at=z=1", 400},
		{"/api/v1/models/cal/predict", 400},
		{"/api/v1/models/cal/predict?at=x=1&level=2", 400},
		{"/api/v1/models/cal/inverse?reading=abc", 400},
		{"/api/v1/models/cal/inverse?reading=1&readings=0", 400},
		{"/api/v1/models/nope/inverse?reading=1", 404},
	} {
		if code, body := get(c.path); code != c.code || !strings.Contains(body, `"error"`) {
			t.Errorf("GET %s: %d %s, want %d with an error", c.path, code, body, c.code)
		}
	}

	if _, err := src.Answer(ctx, "cal", view.Question{At: []map[string]float64{{"z": 1}}}); !errors.Is(err, view.ErrQuestion) {
		t.Errorf("a point in another column: %v, want ErrQuestion", err)
	}
	if _, err := src.Answer(ctx, "nope", view.Question{Readings: []float64{1}}); !errors.Is(err, view.ErrNotFound) {
		t.Errorf("unknown model: %v, want ErrNotFound", err)
	}

	// The curve moves up by 0.5 °C: the drift alert says so in units.
	feedShifted(t, file, rng, 50, 150, 0.5)
	var doc string
	waitFor(t, "a drift alert", func() bool {
		as, err := r.d.View().Alerts(ctx, view.AlertFilter{Model: "cal", Kind: "drift", Limit: 5})
		if err != nil || len(as) == 0 {
			return false
		}
		doc = string(as[0].Doc)
		return true
	})
	var a struct {
		Explanation string `json:"explanation"`
		Drift       struct {
			Measures []struct {
				Name    string             `json:"name"`
				Kind    string             `json:"kind"`
				ShiftSE *float64           `json:"shift_se"`
				Unit    string             `json:"unit"`
				AtUnits map[string]string  `json:"at_units"`
				At      map[string]float64 `json:"at"`
			} `json:"measures"`
		} `json:"drift"`
	}
	if err := json.Unmarshal([]byte(doc), &a); err != nil {
		t.Fatal(err)
	}
	t.Logf("drift alert: %s", a.Explanation)
	if !strings.Contains(a.Explanation, "at x = 9 mV the curve now reads ") || !strings.Contains(a.Explanation, " °C higher (± ") {
		t.Errorf("drift explanation does not state the shift in units: %s", a.Explanation)
	}
	found := false
	for _, d := range a.Drift.Measures {
		if d.Kind != "prediction" {
			continue
		}
		found = true
		if d.ShiftSE == nil || !(*d.ShiftSE > 0) || d.Unit != "°C" || d.AtUnits["x"] != "mV" {
			t.Errorf("checkpoint measure %+v: want a positive shift_se and the units", d)
		}
	}
	if !found {
		t.Errorf("no checkpoint measure in %s", doc)
	}
	if !strings.Contains(a.Explanation, "standard errors away") && !strings.Contains(a.Explanation, "beyond the tolerance") {
		t.Errorf("the coefficient shift in standard errors is gone: %s", a.Explanation)
	}
}

// TestCalibrationChecked: points and units must fit the model's columns,
// and readings to invert need a line or polynomial in one column.
func TestCalibrationChecked(t *testing.T) {
	base := "[[model]]\nname = \"m\"\nfolder = \"in\"\nresponse = \"y\"\nterms = [%s]\n%s"
	tests := []struct{ name, terms, extra, want string }{
		{"point misses a column", `"x", "z"`, "[model.calibration]\npredict_at = [{ x = 1.0 }]\n", `no value for "z"`},
		{"point names another column", `"x"`, "[model.calibration]\npredict_at = [{ x = 1.0, w = 2.0 }]\n", `"w" is not a predictor column`},
		{"invert two columns", `"x", "z"`, "[model.calibration]\ninvert = [1.0]\n", "line or polynomial"},
		{"invert a log", `"log(x)"`, "[model.calibration]\ninvert = [1.0]\n", "takes a log"},
		{"unit of another column", `"x"`, "units = { q = \"s\" }\n", `"q" is not a column`},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c := testConfig(t, t.TempDir(), fmt.Sprintf(base, tt.terms, tt.extra))
			err := CheckCalibration(mustModel(t, c.Models[0]), c.Models[0])
			if err == nil || !strings.Contains(err.Error(), tt.want) {
				t.Errorf("err = %v, want one naming %q", err, tt.want)
			}
		})
	}
}

func mustModel(t *testing.T, mc config.Model) engine.Model {
	t.Helper()
	m, err := engine.NewModel(mc.Response, mc.Terms, *mc.Intercept)
	if err != nil {
		t.Fatal(err)
	}
	return m
}
