package chart_test

import (
	"fmt"
	"strings"

	"plumb/cmd/plumb/internal/chart"
)

// A chart is a Spec of layers. This one is the shape of a deviation
// chart: residuals against a predictor, a band around zero, the zero
// line, a set-aside point drawn hollow and the point an alert is about
// ringed.
func ExampleSpec() {
	s := chart.Spec{
		Name: "deviation", Width: 480, Height: 300,
		X: chart.Axis{Label: "flow", Unit: "l/min"},
		Y: chart.Axis{Label: "residual", Unit: "mV"},
		Layers: []chart.Layer{
			chart.Band{Class: "pred-band", Legend: "95 % prediction band", X: []float64{0, 10}, Lo: []float64{-1.5, -1.5}, Hi: []float64{1.5, 1.5}, Tone: chart.TonePrediction},
			chart.Rule{Class: "zero", At: 0, Tone: chart.ToneReference},
			chart.Points{Legend: true, Marks: []chart.Mark{
				{X: 1, Y: 0.4, Row: 0, Verdict: "ordinary"},
				{X: 4, Y: -0.2, Row: 1, Verdict: "ordinary", Hollow: true},
				{X: 7, Y: 2.8, Row: 2, Verdict: "outlier", Highlight: true},
			}},
		},
	}
	svg := string(s.HTML())
	fmt.Println(strings.Count(svg, `class="pt `), "points,", strings.Count(svg, "hollow"), "hollow,", strings.Count(svg, `class="highlight"`), "ringed")
	fmt.Println(strings.Contains(svg, ">flow (l/min)<"), strings.Contains(svg, ">95 % prediction band<"))
	// Output:
	// 3 points, 1 hollow, 1 ringed
	// true true
}
