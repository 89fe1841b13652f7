package report

import (
	"plumb/cmd/plumb/internal/chart"
	"plumb/cmd/plumb/internal/view"
)

// deviationFigure is the deviation chart with its caption: each reading
// minus the curve, in the response's units, against the predictor.
func deviationFigure(d view.ModelDetail, predictor string) figure {
	unit := ""
	if u := d.Units[d.Response]; u != "" {
		unit = " (" + u + ")"
	}
	caption := "Each reading minus the curve" + unit + " against " + predictor +
		", with the 95 % prediction band of one new reading around zero. A deviation too small to see on the data-and-fit chart shows here; flagged rows are ringed."
	return figure{ChartDeviation, caption, chart.Deviation(d, predictor).HTML()}
}
