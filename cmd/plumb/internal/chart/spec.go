// Package chart draws plumb's charts, for the dashboard and the report
// alike, in one visual style.
//
// A chart is a Spec: a size, two axes and a list of layers (bands, spans,
// lines, rules, points, axis marks), drawn areas first, then lines, then
// marks, each kind in list order. The builders in
// builders.go turn a model's view into the four specs plumb shows (Fit,
// Influence, Cooks, History); a Spec then renders as an inline SVG
// fragment for a page (HTML), a standalone SVG file (WriteSVG) or a PNG
// (WritePNG, drawn with gonum/plot's vg canvas). Both outputs come from
// the same layout code, so they place the same points at the same spots
// in the same colours.
//
// The SVG carries structure for the browser tests and for scripts: the
// root is <svg class="chart" data-chart="NAME">; each point is an element
// of class "pt v-VERDICT" with data-row; each cutoff line has class
// "cutoff" and data-cutoff=ID; suggestion marks have class "suggest" and
// data-suggest. The look comes from attributes, not from a stylesheet.
//
// Adding to a chart is adding a layer or a field:
//
//	spec.Layers = append(spec.Layers, chart.Band{Class: "pred-band", Tone: chart.TonePrediction, ...})
//	chart.Mark{..., Hollow: true}      // a set-aside point
//	chart.Mark{..., Highlight: true}   // the point an alert is about
//	chart.Rule{Class: "event", Vertical: true, At: 12, Label: "recalibrated"}
//	chart.Axis{Label: "flow", Unit: "l/min"}
package chart

import "math"

// Spec is one chart.
type Spec struct {
	// Name is the chart's kind (data-chart): "fit", "influence", ...
	Name string
	// Label describes the chart for screen readers (aria-label).
	Label string
	// Title, when set, is drawn above the plot (standalone files).
	Title string
	// Width and Height are the size in CSS pixels (points in a PNG).
	Width, Height float64
	X, Y          Axis
	Layers        []Layer
	// Meta is written as <desc> attributes (data-KEY="VALUE"), in order.
	Meta [][2]string
}

// Axis is one axis: its title and how its range is found.
type Axis struct {
	Label string
	// Unit, when set, follows the label in parentheses.
	Unit string
	// Integer keeps ticks on whole numbers (row and fit numbers).
	Integer bool
	// Min and Max fix an end; unset ends come from the layers' data and
	// Include, with a 6 % margin.
	Min, Max Bound
	// Include lists values the range must cover (cutoffs worth seeing).
	Include []float64
}

// Title is the label with its unit.
func (a Axis) Title() string {
	if a.Unit == "" {
		return a.Label
	}
	return a.Label + " (" + a.Unit + ")"
}

// Bound is an optional axis end.
type Bound struct {
	V   float64
	Set bool
}

// At is a set bound.
func At(v float64) Bound { return Bound{V: v, Set: finite(v)} }

// Tone is a colour role of the style (see style.go).
type Tone int

// Tones of bands, lines, spans and rules.
const (
	ToneFit        Tone = iota // the fitted mean and its confidence band
	TonePrediction             // a prediction band (wider, lighter)
	ToneSpread                 // a standard-error ribbon
	ToneDrift                  // the drift band around a baseline
	ToneCutoff                 // a cutoff line
	ToneReference              // zero and other reference lines
	ToneInk                    // a data series (coefficient history)
	ToneEvent                  // an event on a time axis
)

// Dash is a line pattern.
type Dash int

// Line patterns.
const (
	Solid Dash = iota
	Dashed
	Dotted
)

// Layer is one thing drawn on the plot: Band, Line, Span, Rule, Points
// or AxisMarks.
type Layer interface {
	// extent adds the layer's data to the x and y ranges.
	extent(xs, ys []float64) ([]float64, []float64)
	// depth orders the drawing: areas (0) under lines (1) under marks (2),
	// each depth in the order of Spec.Layers.
	depth() int
	paint(l *layout, c canvas)
}

// Band fills between Lo and Hi over X (a confidence or prediction band,
// a standard-error ribbon). SVG: <polygon class=CLASS>.
type Band struct {
	Class, Legend string
	X, Lo, Hi     []float64
	Tone          Tone
}

// Line joins (X[i], Y[i]). SVG: <polyline class=CLASS>.
type Line struct {
	Class, Legend string
	X, Y          []float64
	Tone          Tone
	Dash          Dash
}

// Span shades the plot between two y values across its width (the drift
// band). SVG: <rect class=CLASS>.
type Span struct {
	Class, Legend string
	Lo, Hi        float64
	Tone          Tone
}

// Rule is a horizontal (or Vertical) line across the plot at At, labelled
// at its end: a cutoff (Class "cutoff", ID in data-cutoff), a reference
// line ("zero") or an event marker on the history ("event"). A rule
// outside the axis range is not drawn.
type Rule struct {
	Class, ID, Label string
	Vertical         bool
	At               float64
	Tone             Tone
	Dash             Dash
	// Legend, when set, lists the rule in the legend instead of labelling it.
	Legend string
}

// Points draws marks. Each mark's shape and colour say its verdict; a
// Series layer draws small dots of one colour joined by nothing (the
// coefficient history). SVG: a <g class=CLASS> of one element per mark.
type Points struct {
	Class string
	Marks []Mark
	// Stems draws a line from y = 0 to each mark (Cook's distance).
	Stems bool
	// Series draws every mark as a small ink dot of class "pt hist".
	Series bool
	// Legend lists each verdict present in the legend.
	Legend bool
}

// Mark is one point.
type Mark struct {
	X, Y    float64
	Row     int    // data-row (points of the fit)
	Verdict string // ordinary, notable, outlier, influential, suspect ("" = none)
	Title   string // tooltip
	// Hollow draws the outline only (a point set aside from the fit).
	Hollow bool
	// Highlight rings the point (the row an alert is about).
	Highlight bool
}

// AxisMarks puts triangles on the x axis with a faint guide up the plot
// (where to collect more data). SVG: class "suggest", data-suggest=i.
type AxisMarks struct {
	Class, Legend string
	At            []float64
	Titles        []string
}

func (b Band) extent(xs, ys []float64) ([]float64, []float64) {
	return append(xs, b.X...), append(append(ys, b.Lo...), b.Hi...)
}

func (l Line) extent(xs, ys []float64) ([]float64, []float64) {
	return append(xs, l.X...), append(ys, l.Y...)
}

func (Span) extent(xs, ys []float64) ([]float64, []float64) { return xs, ys }
func (Rule) extent(xs, ys []float64) ([]float64, []float64) { return xs, ys }

func (p Points) extent(xs, ys []float64) ([]float64, []float64) {
	for _, m := range p.Marks {
		if finite(m.X) && finite(m.Y) {
			xs, ys = append(xs, m.X), append(ys, m.Y)
		}
	}
	return xs, ys
}

func (a AxisMarks) extent(xs, ys []float64) ([]float64, []float64) {
	return append(xs, a.At...), ys
}

func (Band) depth() int      { return 0 }
func (Span) depth() int      { return 0 }
func (Line) depth() int      { return 1 }
func (Rule) depth() int      { return 1 }
func (Points) depth() int    { return 2 }
func (AxisMarks) depth() int { return 2 }

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
