package report

import (
	"bytes"
	"math"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

// The report shows the deviation chart with the units on its axes and
// the configured calibration answers, an undetermined bound as "—".
func TestReportDeviationUnitsAnswers(t *testing.T) {
	src := viewtest.Demo()
	d, err := src.Model(t.Context(), "bench-b")
	if err != nil {
		t.Fatal(err)
	}
	x := d.Predictors[0]
	d.Units = map[string]string{d.Response: "mV", x: "kPa"}
	d.Predictions = []view.Prediction{{At: map[string]view.Float{x: 75}, Fitted: 150.1, SEFit: 0.3,
		Confidence: view.Pair{149.5, 150.7}, Prediction: view.Pair{146.2, 154}, Level: 0.95, Readings: 1, DF: 18}}
	d.Inverse = []view.Inverse{{Reading: 150, Column: x, Estimate: 74.9, StandardUncertainty: 0.9,
		Interval: view.Pair{73.1, view.Float(math.NaN())}, Status: "unique", Shape: "open-high",
		Note: "the interval reaches the high end of the calibrated range (130)", Level: 0.95, Readings: 1, DF: 18}}
	src.SetModel(d)
	opts := Options{Generated: time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC)}
	c, err := Collect(t.Context(), src, "bench-b", opts)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := Render(&buf, c, opts); err != nil {
		t.Fatal(err)
	}
	html := buf.String()
	for _, want := range []string{
		`data-chart="deviation"`, `class="pred-band"`, `class="highlight"`,
		`>reading − curve (mV)<`, ">" + x + " (kPa)<", ">" + d.Response + " (mV)<",
		"Each reading minus the curve (mV)", "σ (residual SD)</span><b>" + num(d.Sigma) + " mV</b>",
		`data-predictions`, x + " = 75", "146.2 … 154",
		`data-inverse`, x + " = 74.9", "73.1 … —", "reaches the high end of the calibrated range",
	} {
		if !strings.Contains(html, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	// The deviation chart comes right after the data-and-fit chart.
	if f, dv := strings.Index(html, `data-chart="fit"`), strings.Index(html, `data-chart="deviation"`); !(f >= 0 && dv > f) {
		t.Errorf("fit chart at %d, deviation chart at %d", f, dv)
	}
}
