package report

import (
	"fmt"
	"io"

	"plumb/cmd/plumb/internal/chart"
	"plumb/cmd/plumb/internal/view"
)

// The report's charts come from package chart, as the dashboard's do: the
// same specs, inline as SVG in the page, or one at a time as SVG or PNG.

// Chart names accepted by Chart.
const (
	ChartFit       = chart.NameFit       // response against the first predictor, fitted curve, band, suggestions
	ChartInfluence = chart.NameInfluence // studentized residual against leverage, 2p/n and ±Bonferroni |t|
	ChartCooks     = chart.NameCooks     // Cook's distance by row, 4/n and the absolute cutoff
	ChartDeviation = chart.NameDeviation // reading minus curve against the first predictor, prediction band around zero
)

// MaxDrawn is the most points a chart draws (chart.MaxDrawn).
const MaxDrawn = chart.MaxDrawn

// ErrUnknownChart is returned (wrapped) for a chart name or format that
// Chart does not know.
var ErrUnknownChart = fmt.Errorf("report: unknown chart or format")

// firstPredictor is the predictor the fit chart uses when none is chosen.
func firstPredictor(d view.ModelDetail) string {
	if len(d.Predictors) > 0 {
		return d.Predictors[0]
	}
	return ""
}

// Chart writes one chart of the model's current fit as a standalone SVG or
// PNG: name is ChartFit, ChartDeviation, ChartInfluence or ChartCooks; format is "svg" or
// "png". An unknown name or format gives an error wrapping ErrUnknownChart.
func Chart(w io.Writer, d view.ModelDetail, name, format string) error {
	if format != "svg" && format != "png" {
		return fmt.Errorf("format %q (want svg or png): %w", format, ErrUnknownChart)
	}
	if len(d.Points) == 0 {
		return fmt.Errorf("report: model %q has no fitted points to chart", d.Name)
	}
	var s chart.Spec
	switch name {
	case ChartFit:
		s = chart.Fit(d, firstPredictor(d))
		s.Title = d.Name + ": data and fit"
	case ChartDeviation:
		s = chart.Deviation(d, firstPredictor(d))
		s.Title = d.Name + ": deviation from the curve"
	case ChartInfluence:
		s = chart.Influence(d)
		s.Title = d.Name + ": residual against leverage"
	case ChartCooks:
		s = chart.Cooks(d)
		s.Title = d.Name + ": Cook's distance"
	default:
		return fmt.Errorf("chart %q (want fit, deviation, influence or cooks): %w", name, ErrUnknownChart)
	}
	return write(w, s, format)
}

// HistoryChart writes the history of one coefficient across fits, with the
// model's drift band for it when there is one.
func HistoryChart(w io.Writer, d view.ModelDetail, fits []view.FitView, term, format string) error {
	s, ok := chart.History(fits, term, driftOf(d, term))
	if !ok {
		return fmt.Errorf("report: no fit in the history has the term %q", term)
	}
	s.Title = d.Name + ": history of " + term
	return write(w, s, format)
}

func write(w io.Writer, s chart.Spec, format string) error {
	switch format {
	case "svg":
		return s.WriteSVG(w)
	case "png":
		return s.WritePNG(w)
	}
	return fmt.Errorf("format %q (want svg or png): %w", format, ErrUnknownChart)
}

func driftOf(d view.ModelDetail, term string) *view.DriftBand {
	for i := range d.Drift {
		if d.Drift[i].Term == term {
			return &d.Drift[i]
		}
	}
	return nil
}
