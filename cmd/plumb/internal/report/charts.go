package report

import (
	"bytes"
	"fmt"
	"image/color"
	"io"
	"math"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"

	"plumb/cmd/plumb/internal/view"
)

// Chart names accepted by Chart.
const (
	ChartFit       = "fit"       // response against the first predictor, fitted curve, band, suggestions
	ChartInfluence = "influence" // studentized residual against leverage, 2p/n and ±Bonferroni |t|
	ChartCooks     = "cooks"     // Cook's distance by row, 4/n and the absolute cutoff
)

// MaxDrawn is the most points a chart draws; beyond it ordinary points
// are thinned evenly (flagged points are always drawn).
const MaxDrawn = 5000

// ErrUnknownChart is returned (wrapped) for a chart name or format that
// Chart does not know.
var ErrUnknownChart = fmt.Errorf("report: unknown chart or format")

// The report's palette: ink, one green, and a colour and a shape per verdict.
var (
	ink       = color.RGBA{0x1f, 0x2a, 0x33, 0xff}
	muted     = color.RGBA{0x66, 0x71, 0x7a, 0xff}
	green     = color.RGBA{0x2f, 0x6f, 0x62, 0xff}
	greenSoft = color.NRGBA{0x2f, 0x6f, 0x62, 0x30} // NRGBA: not premultiplied
	cutColor  = color.RGBA{0x6d, 0x58, 0x43, 0xff}
	driftFill = color.NRGBA{0xd9, 0xa4, 0x41, 0x48}
	seFill    = color.NRGBA{0x1f, 0x2a, 0x33, 0x22}
	gridColor = color.RGBA{0xe6, 0xe1, 0xd6, 0xff}
)

type verdictStyle struct {
	word  string
	color color.Color
	shape draw.GlyphDrawer
	r     vg.Length
}

var verdictStyles = []verdictStyle{
	{view.VerdictOrdinary, color.RGBA{0x8b, 0x95, 0x9d, 0xff}, draw.CircleGlyph{}, 2.4},
	{view.VerdictNotable, color.RGBA{0xb7, 0x86, 0x2c, 0xff}, draw.RingGlyph{}, 3},
	{view.VerdictOutlier, color.RGBA{0x3d, 0x5a, 0x98, 0xff}, draw.PyramidGlyph{}, 3.6},
	{view.VerdictInfluential, color.RGBA{0x8c, 0x4a, 0x8f, 0xff}, diamondGlyph{}, 3.6},
	{view.VerdictSuspect, color.RGBA{0xb3, 0x3b, 0x2a, 0xff}, draw.BoxGlyph{}, 3.4},
}

// diamondGlyph is a filled diamond (the mark of an influential row).
type diamondGlyph struct{}

// DrawGlyph implements draw.GlyphDrawer.
func (diamondGlyph) DrawGlyph(c *draw.Canvas, sty draw.GlyphStyle, pt vg.Point) {
	c.SetColor(sty.Color)
	r := sty.Radius
	var p vg.Path
	p.Move(vg.Point{X: pt.X, Y: pt.Y + r})
	p.Line(vg.Point{X: pt.X + r, Y: pt.Y})
	p.Line(vg.Point{X: pt.X, Y: pt.Y - r})
	p.Line(vg.Point{X: pt.X - r, Y: pt.Y})
	p.Close()
	c.Fill(p)
}

// sans is the typeface of every label (Liberation Sans, which gonum/plot
// ships, so PNG output needs no system font).
var sans = font.Font{Typeface: "Liberation", Variant: "Sans"}

func sansStyle(ts *text.Style, size vg.Length) {
	ts.Font = sans
	ts.Font.Size = size
	ts.Handler = plot.DefaultTextHandler
}

func newPlot(title, x, y string) *plot.Plot {
	p := plot.New()
	p.BackgroundColor = color.RGBA{0xff, 0xfe, 0xfb, 0xff}
	p.Title.Text = title
	sansStyle(&p.Title.TextStyle, 12)
	p.Title.TextStyle.Color = ink
	p.Title.Padding = vg.Points(6)
	p.X.Label.Text = x
	p.Y.Label.Text = y
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		a.Color = muted
		sansStyle(&a.Label.TextStyle, 10)
		sansStyle(&a.Tick.Label, 9)
		a.Label.TextStyle.Color = ink
		a.Tick.Color = muted
		a.Tick.Label.Color = muted
	}
	g := plotter.NewGrid()
	g.Vertical.Color, g.Horizontal.Color = gridColor, gridColor
	p.Add(g)
	p.Legend.Top = true
	sansStyle(&p.Legend.TextStyle, 9)
	p.Legend.TextStyle.Color = muted
	return p
}

// addPoints adds one scatter per verdict present, with a legend entry.
func addPoints(p *plot.Plot, pts []view.Point, xy func(view.Point) (float64, float64)) error {
	pts, _ = view.ThinPoints(pts, MaxDrawn)
	for _, st := range verdictStyles {
		var xys plotter.XYs
		for _, pt := range pts {
			if pt.Verdict != st.word && !(st.word == view.VerdictOrdinary && pt.Verdict == "") {
				continue
			}
			x, y := xy(pt)
			if finite(x) && finite(y) {
				xys = append(xys, plotter.XY{X: x, Y: y})
			}
		}
		if len(xys) == 0 {
			continue
		}
		s, err := plotter.NewScatter(xys)
		if err != nil {
			return err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: st.color, Radius: st.r, Shape: st.shape}
		p.Add(s)
		p.Legend.Add(st.word, s)
	}
	return nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func line(p *plot.Plot, xys plotter.XYs, c color.Color, width vg.Length, dash []vg.Length) (*plotter.Line, error) {
	l, err := plotter.NewLine(xys)
	if err != nil {
		return nil, err
	}
	l.Color, l.Width, l.Dashes = c, width, dash
	p.Add(l)
	return l, nil
}

var dashed = []vg.Length{vg.Points(4), vg.Points(3)}
var dotted = []vg.Length{vg.Points(1), vg.Points(2.5)}

// hcut draws a horizontal cutoff across [x0, x1].
func hcut(p *plot.Plot, y, x0, x1 float64, dash []vg.Length, label string) error {
	if !finite(y) {
		return nil
	}
	l, err := line(p, plotter.XYs{{X: x0, Y: y}, {X: x1, Y: y}}, cutColor, vg.Points(1), dash)
	if err != nil {
		return err
	}
	if label != "" {
		p.Legend.Add(label, l)
	}
	return nil
}

func fitPlot(d view.ModelDetail, predictor string) (*plot.Plot, error) {
	p := newPlot("Data and fit", predictor, d.Response)
	if c, ok := d.Curve(predictor); ok && len(c.X) > 1 {
		var band, lower plotter.XYs
		for i := range c.X {
			if i < len(c.Lower) && i < len(c.Upper) && c.X[i].Finite() && c.Lower[i].Finite() && c.Upper[i].Finite() {
				band = append(band, plotter.XY{X: float64(c.X[i]), Y: float64(c.Upper[i])})
				lower = append(lower, plotter.XY{X: float64(c.X[i]), Y: float64(c.Lower[i])})
			}
		}
		for i := len(lower) - 1; i >= 0; i-- {
			band = append(band, lower[i])
		}
		if poly, err := plotter.NewPolygon(band); err == nil && len(band) > 2 {
			poly.Color = greenSoft
			poly.LineStyle.Width = 0
			p.Add(poly)
			p.Legend.Add("95 % band", poly)
		}
		var mid plotter.XYs
		for i := range c.X {
			if i < len(c.Y) && c.X[i].Finite() && c.Y[i].Finite() {
				mid = append(mid, plotter.XY{X: float64(c.X[i]), Y: float64(c.Y[i])})
			}
		}
		if len(mid) > 1 {
			l, err := line(p, mid, green, vg.Points(1.6), nil)
			if err != nil {
				return nil, err
			}
			p.Legend.Add("fitted", l)
		}
		// A rising curve fills the top right corner: put the legend left.
		if len(c.Y) > 1 && c.Y[len(c.Y)-1] > c.Y[0] {
			p.Legend.Left = true
		}
	}
	if err := addPoints(p, d.Points, func(pt view.Point) (float64, float64) {
		return float64(pt.X[predictor]), float64(pt.Y)
	}); err != nil {
		return nil, err
	}
	var sx plotter.XYs
	for _, s := range d.Suggestions {
		if v, ok := s.At[predictor]; ok && v.Finite() {
			sx = append(sx, plotter.XY{X: float64(v)})
		}
	}
	if len(sx) > 0 {
		// Place the marks on the predictor axis: at the bottom of the data range.
		lo := math.Inf(1)
		for _, pt := range d.Points {
			lo = math.Min(lo, float64(pt.Y))
		}
		if c, ok := d.Curve(predictor); ok {
			for _, v := range c.Lower {
				if v.Finite() {
					lo = math.Min(lo, float64(v))
				}
			}
		}
		for i := range sx {
			sx[i].Y = lo
		}
		s, err := plotter.NewScatter(sx)
		if err != nil {
			return nil, err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: green, Radius: vg.Points(4.5), Shape: draw.PyramidGlyph{}}
		p.Add(s)
		p.Legend.Add("collect here", s)
	}
	headroom(p, 0.3)
	return p, nil
}

func influencePlot(d view.ModelDetail) (*plot.Plot, error) {
	p := newPlot("Residual against leverage", "leverage h", "studentized residual t")
	xmax, ymax, ymin := 0.0, 0.0, 0.0
	if lev := float64(d.Cutoffs.Leverage); finite(lev) {
		xmax = lev * 1.1
	}
	tc := float64(d.Cutoffs.TCritical)
	if finite(tc) {
		ymax, ymin = tc, -tc
	}
	for _, pt := range d.Points {
		if v := float64(pt.Leverage); finite(v) {
			xmax = math.Max(xmax, v*1.05)
		}
		if v := float64(pt.StudentizedExternal); finite(v) {
			ymax, ymin = math.Max(ymax, v), math.Min(ymin, v)
		}
	}
	if err := addPoints(p, d.Points, func(pt view.Point) (float64, float64) {
		return float64(pt.Leverage), float64(pt.StudentizedExternal)
	}); err != nil {
		return nil, err
	}
	if lev := float64(d.Cutoffs.Leverage); finite(lev) {
		l, err := line(p, plotter.XYs{{X: lev, Y: ymin}, {X: lev, Y: ymax}}, cutColor, vg.Points(1), dashed)
		if err != nil {
			return nil, err
		}
		p.Legend.Add("2p/n = "+num(d.Cutoffs.Leverage), l)
	}
	if finite(tc) {
		if err := hcut(p, tc, 0, xmax, dotted, "±"+num(d.Cutoffs.TCritical)+" Bonferroni"); err != nil {
			return nil, err
		}
		if err := hcut(p, -tc, 0, xmax, dotted, ""); err != nil {
			return nil, err
		}
	}
	p.X.Min = 0
	headroom(p, 0.3)
	return p, nil
}

func cooksPlot(d view.ModelDetail) (*plot.Plot, error) {
	p := newPlot("Cook's distance", "observation (row of the fit)", "Cook's distance")
	n := float64(len(d.Points))
	stems, _ := view.ThinPoints(d.Points, MaxDrawn)
	if len(d.Points) > 400 {
		stems = nil // too dense to read; the glyphs carry it
	}
	for _, pt := range stems {
		if !pt.Cook.Finite() {
			continue
		}
		x := float64(pt.Row + 1)
		if _, err := line(p, plotter.XYs{{X: x, Y: 0}, {X: x, Y: float64(pt.Cook)}}, color.RGBA{0xc7, 0xc0, 0xb2, 0xff}, vg.Points(0.8), nil); err != nil {
			return nil, err
		}
	}
	if err := addPoints(p, d.Points, func(pt view.Point) (float64, float64) {
		return float64(pt.Row + 1), float64(pt.Cook)
	}); err != nil {
		return nil, err
	}
	if err := hcut(p, float64(d.Cutoffs.CookSizeAdjusted), 0.5, n+0.5, dashed, "4/n = "+num(d.Cutoffs.CookSizeAdjusted)); err != nil {
		return nil, err
	}
	if err := hcut(p, float64(d.Cutoffs.CookAbsolute), 0.5, n+0.5, dotted, "absolute "+num(d.Cutoffs.CookAbsolute)); err != nil {
		return nil, err
	}
	p.Y.Min = 0
	headroom(p, 0.35)
	return p, nil
}

func historyPlot(fits []view.FitView, term string, band *view.DriftBand) (*plot.Plot, error) {
	p := newPlot("History of "+term, "fit number", term)
	var est, seBand plotter.XYs
	var lows plotter.XYs
	for i, f := range fits {
		e, ok := f.Estimate(term)
		if !ok || !e.Finite() {
			continue
		}
		x := float64(i + 1)
		est = append(est, plotter.XY{X: x, Y: float64(e)})
		se := math.NaN()
		for k, t := range f.Terms {
			if t == term && k < len(f.StdErrors) {
				se = float64(f.StdErrors[k])
			}
		}
		if finite(se) {
			seBand = append(seBand, plotter.XY{X: x, Y: float64(e) + 1.96*se})
			lows = append(lows, plotter.XY{X: x, Y: float64(e) - 1.96*se})
		}
	}
	if len(est) == 0 {
		return nil, fmt.Errorf("report: no fit in the history has the term %q", term)
	}
	x0, x1 := est[0].X, est[len(est)-1].X
	if band != nil && band.Lower.Finite() && band.Upper.Finite() {
		poly, err := plotter.NewPolygon(plotter.XYs{
			{X: x0, Y: float64(band.Lower)}, {X: x1, Y: float64(band.Lower)},
			{X: x1, Y: float64(band.Upper)}, {X: x0, Y: float64(band.Upper)},
		})
		if err == nil {
			poly.Color = driftFill
			poly.LineStyle.Width = 0
			p.Add(poly)
			p.Legend.Add("drift band", poly)
		}
		if err := hcut(p, float64(band.Baseline), x0, x1, nil, "baseline"); err != nil {
			return nil, err
		}
	}
	if len(seBand) > 1 {
		for i := len(lows) - 1; i >= 0; i-- {
			seBand = append(seBand, lows[i])
		}
		if poly, err := plotter.NewPolygon(seBand); err == nil {
			poly.Color = seFill
			poly.LineStyle.Width = 0
			p.Add(poly)
			p.Legend.Add("±1.96 SE", poly)
		}
	}
	l, s, err := plotter.NewLinePoints(est)
	if err != nil {
		return nil, err
	}
	l.Color, l.Width = ink, vg.Points(1.1)
	s.GlyphStyle = draw.GlyphStyle{Color: ink, Radius: vg.Points(1.6), Shape: draw.CircleGlyph{}}
	p.Add(l, s)
	p.Legend.Add("estimate", l, s)
	// Keep the early fits' wide errors from flattening the series.
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, e := range est {
		lo, hi = math.Min(lo, e.Y), math.Max(hi, e.Y)
	}
	if band != nil && band.Lower.Finite() && band.Upper.Finite() {
		lo, hi = math.Min(lo, float64(band.Lower)), math.Max(hi, float64(band.Upper))
	}
	w := math.Max(hi-lo, math.Abs(hi)*1e-6+1e-12)
	p.Y.Min, p.Y.Max = lo-0.3*w, hi+0.9*w
	return p, nil
}

// headroom raises the top of the y axis so that the legend, drawn in the
// top right corner, sits above the data.
func headroom(p *plot.Plot, frac float64) {
	p.Y.Max += (p.Y.Max - p.Y.Min) * frac
}

// render writes the plot as SVG or PNG at the given size.
func render(w io.Writer, p *plot.Plot, format string, width, height vg.Length) error {
	// A non-finite axis bound would stall the tick search: fall back.
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		switch {
		case !finite(a.Min) || !finite(a.Max) || a.Min > a.Max:
			a.Min, a.Max = 0, 1
		case a.Min == a.Max:
			d := math.Max(math.Abs(a.Min)*0.1, 1)
			a.Min, a.Max = a.Min-d, a.Max+d
		}
	}
	switch format {
	case "svg":
		c := vgsvg.New(width, height)
		p.Draw(draw.New(c))
		_, err := c.WriteTo(w)
		return err
	case "png":
		c := vgimg.NewWith(vgimg.UseWH(width, height), vgimg.UseDPI(144))
		p.Draw(draw.New(c))
		_, err := vgimg.PngCanvas{Canvas: c}.WriteTo(w)
		return err
	default:
		return fmt.Errorf("format %q (want svg or png): %w", format, ErrUnknownChart)
	}
}

// firstPredictor is the predictor the fit chart uses when none is chosen.
func firstPredictor(d view.ModelDetail) string {
	if len(d.Predictors) > 0 {
		return d.Predictors[0]
	}
	return ""
}

// Chart writes one chart of the model's current fit as a standalone SVG or
// PNG: name is ChartFit, ChartInfluence or ChartCooks; format is "svg" or
// "png". An unknown name or format gives an error wrapping ErrUnknownChart.
func Chart(w io.Writer, d view.ModelDetail, name, format string) error {
	if format != "svg" && format != "png" {
		return fmt.Errorf("format %q (want svg or png): %w", format, ErrUnknownChart)
	}
	if len(d.Points) == 0 {
		return fmt.Errorf("report: model %q has no fitted points to chart", d.Name)
	}
	var p *plot.Plot
	var err error
	switch name {
	case ChartFit:
		p, err = fitPlot(d, firstPredictor(d))
	case ChartInfluence:
		p, err = influencePlot(d)
	case ChartCooks:
		p, err = cooksPlot(d)
	default:
		return fmt.Errorf("chart %q (want fit, influence or cooks): %w", name, ErrUnknownChart)
	}
	if err != nil {
		return fmt.Errorf("report: chart %s: %w", name, err)
	}
	return render(w, p, format, 7*vg.Inch, 4.2*vg.Inch)
}

// HistoryChart writes the history of one coefficient across fits, with the
// model's drift band for it when there is one.
func HistoryChart(w io.Writer, d view.ModelDetail, fits []view.FitView, term, format string) error {
	p, err := historyPlot(fits, term, driftOf(d, term))
	if err != nil {
		return err
	}
	return render(w, p, format, 7*vg.Inch, 3.6*vg.Inch)
}

func driftOf(d view.ModelDetail, term string) *view.DriftBand {
	for i := range d.Drift {
		if d.Drift[i].Term == term {
			return &d.Drift[i]
		}
	}
	return nil
}

// inlineSVG renders a plot as an SVG fragment for embedding in HTML: the
// XML prolog is dropped and the root element is tagged with data-chart.
func inlineSVG(p *plot.Plot, name string, width, height vg.Length) (string, error) {
	var buf bytes.Buffer
	if err := render(&buf, p, "svg", width, height); err != nil {
		return "", err
	}
	s := buf.String()
	i := strings.Index(s, "<svg")
	if i < 0 {
		return "", fmt.Errorf("report: chart %s: no <svg> element in the rendering", name)
	}
	s = s[i:]
	s = `<svg data-chart="` + name + `" ` + s[len("<svg "):]
	return s, nil
}
