package web

import (
	"fmt"
	"html"
	"html/template"
	"math"
	"strconv"
	"strings"
	"sync/atomic"

	"plumb/cmd/plumb/internal/view"
)

// The dashboard's charts are inline SVG drawn here. Each chart's root is
// <svg data-chart="NAME">; every observation is an element of class "pt"
// plus "v-<verdict>"; every cutoff line has class "cutoff" and a
// data-cutoff naming it; suggestions have class "suggest". The look
// (colours, strokes) comes from the stylesheet, so the markup carries
// only structure.

// MaxDrawn is the most points a dashboard chart draws; beyond it ordinary
// points are thinned evenly (flagged points are always drawn).
const MaxDrawn = 3000

var chartLabels = map[string]string{
	"fit":       "Data and fitted curve with its confidence band and the suggested collection points",
	"influence": "Studentized residual against leverage with the 2p/n and Bonferroni cutoff lines",
	"cooks":     "Cook's distance by observation with its cutoff lines",
	"history":   "Coefficient history with its drift band",
}

// clipSeq makes clip-path ids unique within a page.
var clipSeq atomic.Uint64

type chart struct {
	b              strings.Builder
	name           string
	w, h           float64
	ml, mr, mt, mb float64
	x0, x1, y0, y1 float64
	clip           string
}

func newChart(name string, w, h float64, xs, ys []float64) *chart {
	c := &chart{name: name, w: w, h: h, ml: 58, mr: 16, mt: 14, mb: 44}
	c.x0, c.x1 = padRange(xs)
	c.y0, c.y1 = padRange(ys)
	c.clip = fmt.Sprintf("clip-%s-%d", name, clipSeq.Add(1))
	fmt.Fprintf(&c.b, `<svg xmlns="http://www.w3.org/2000/svg" class="chart" data-chart="%s" viewBox="0 0 %g %g" role="img" aria-label="%s" preserveAspectRatio="xMidYMid meet">`,
		html.EscapeString(name), w, h, html.EscapeString(chartLabels[name]))
	fmt.Fprintf(&c.b, `<defs><clipPath id="%s"><rect x="%g" y="%g" width="%g" height="%g"/></clipPath></defs>`,
		c.clip, c.ml, c.mt, w-c.ml-c.mr, h-c.mt-c.mb)
	return c
}

// padRange returns a range covering the finite values with 6 % margins.
func padRange(v []float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			continue
		}
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	if math.IsInf(lo, 1) {
		return 0, 1
	}
	if hi == lo {
		d := math.Max(math.Abs(lo)*0.1, 1)
		return lo - d, hi + d
	}
	pad := (hi - lo) * 0.06
	return lo - pad, hi + pad
}

func (c *chart) px(x float64) float64 {
	return c.ml + (x-c.x0)/(c.x1-c.x0)*(c.w-c.ml-c.mr)
}

func (c *chart) py(y float64) float64 {
	return c.h - c.mb - (y-c.y0)/(c.y1-c.y0)*(c.h-c.mt-c.mb)
}

func f1(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }

// niceTicks returns about n round tick values within [lo, hi].
func niceTicks(lo, hi float64, n int) []float64 {
	span := hi - lo
	if !(span > 0) {
		return []float64{lo}
	}
	raw := span / float64(n)
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	step := mag
	for _, m := range []float64{1, 2, 2.5, 5, 10} {
		step = m * mag
		if raw <= step {
			break
		}
	}
	var out []float64
	for v := math.Ceil(lo/step) * step; v <= hi+step*1e-9; v += step {
		if math.Abs(v) < step*1e-9 {
			v = 0
		}
		out = append(out, v)
	}
	return out
}

func tickLabel(v float64) string {
	a := math.Abs(v)
	switch {
	case v == 0:
		return "0"
	case a >= 1e5 || a < 1e-3:
		return strconv.FormatFloat(v, 'e', 1, 64)
	default:
		return strconv.FormatFloat(v, 'g', 4, 64)
	}
}

// axes draws the frame, grid, ticks and axis titles.
func (c *chart) axes(xlabel, ylabel string, xInt bool) {
	b := &c.b
	b.WriteString(`<g class="axes">`)
	fmt.Fprintf(b, `<rect class="plotarea" x="%s" y="%s" width="%s" height="%s"/>`,
		f1(c.ml), f1(c.mt), f1(c.w-c.ml-c.mr), f1(c.h-c.mt-c.mb))
	for _, t := range niceTicks(c.x0, c.x1, 6) {
		if xInt && t != math.Trunc(t) {
			continue
		}
		x := c.px(t)
		fmt.Fprintf(b, `<line class="gridline" x1="%s" y1="%s" x2="%s" y2="%s"/>`, f1(x), f1(c.mt), f1(x), f1(c.h-c.mb))
		fmt.Fprintf(b, `<text class="tick" x="%s" y="%s" text-anchor="middle">%s</text>`, f1(x), f1(c.h-c.mb+15), tickLabel(t))
	}
	for _, t := range niceTicks(c.y0, c.y1, 5) {
		y := c.py(t)
		fmt.Fprintf(b, `<line class="gridline" x1="%s" y1="%s" x2="%s" y2="%s"/>`, f1(c.ml), f1(y), f1(c.w-c.mr), f1(y))
		fmt.Fprintf(b, `<text class="tick" x="%s" y="%s" text-anchor="end">%s</text>`, f1(c.ml-6), f1(y+3.5), tickLabel(t))
	}
	fmt.Fprintf(b, `<text class="axis-title" x="%s" y="%s" text-anchor="middle">%s</text>`,
		f1(c.ml+(c.w-c.ml-c.mr)/2), f1(c.h-8), html.EscapeString(xlabel))
	fmt.Fprintf(b, `<text class="axis-title" transform="translate(14 %s) rotate(-90)" text-anchor="middle">%s</text>`,
		f1(c.mt+(c.h-c.mt-c.mb)/2), html.EscapeString(ylabel))
	b.WriteString(`</g>`)
}

func (c *chart) open(class string) {
	fmt.Fprintf(&c.b, `<g class="%s" clip-path="url(#%s)">`, class, c.clip)
}

func (c *chart) close() { c.b.WriteString(`</g>`) }

// hline draws a horizontal cutoff line with a label at its right end.
func (c *chart) hline(y float64, cutoff, label string) {
	if !finite(y) || y < c.y0 || y > c.y1 {
		return
	}
	py := c.py(y)
	fmt.Fprintf(&c.b, `<line class="cutoff" data-cutoff="%s" x1="%s" y1="%s" x2="%s" y2="%s"><title>%s</title></line>`,
		cutoff, f1(c.ml), f1(py), f1(c.w-c.mr), f1(py), html.EscapeString(label))
	fmt.Fprintf(&c.b, `<text class="cutoff-label" x="%s" y="%s" text-anchor="end">%s</text>`,
		f1(c.w-c.mr-4), f1(py-4), html.EscapeString(label))
}

// vline draws a vertical cutoff line labelled at its top.
func (c *chart) vline(x float64, cutoff, label string) {
	if !finite(x) || x < c.x0 || x > c.x1 {
		return
	}
	px := c.px(x)
	fmt.Fprintf(&c.b, `<line class="cutoff" data-cutoff="%s" x1="%s" y1="%s" x2="%s" y2="%s"><title>%s</title></line>`,
		cutoff, f1(px), f1(c.mt), f1(px), f1(c.h-c.mb), html.EscapeString(label))
	fmt.Fprintf(&c.b, `<text class="cutoff-label" x="%s" y="%s">%s</text>`, f1(px+4), f1(c.h-c.mb-5), html.EscapeString(label))
}

// marker draws one observation in the shape of its verdict.
func (c *chart) marker(x, y float64, verdict string, row int, title string) {
	if !finite(x) || !finite(y) {
		return
	}
	px, py := c.px(x), c.py(y)
	cls := fmt.Sprintf(`class="pt v-%s" data-row="%d"`, html.EscapeString(verdictOr(verdict)), row)
	t := "<title>" + html.EscapeString(title) + "</title>"
	switch verdict {
	case view.VerdictSuspect:
		fmt.Fprintf(&c.b, `<rect %s x="%s" y="%s" width="9" height="9">%s</rect>`, cls, f1(px-4.5), f1(py-4.5), t)
	case view.VerdictOutlier:
		fmt.Fprintf(&c.b, `<path %s d="M%s %sl5 8.5h-10z">%s</path>`, cls, f1(px), f1(py-5.5), t)
	case view.VerdictInfluential:
		fmt.Fprintf(&c.b, `<path %s d="M%s %sl5 5.5l-5 5.5l-5 -5.5z">%s</path>`, cls, f1(px), f1(py-5.5), t)
	case view.VerdictNotable:
		fmt.Fprintf(&c.b, `<circle %s cx="%s" cy="%s" r="4.2">%s</circle>`, cls, f1(px), f1(py), t)
	default:
		fmt.Fprintf(&c.b, `<circle %s cx="%s" cy="%s" r="3.3">%s</circle>`, cls, f1(px), f1(py), t)
	}
}

func verdictOr(v string) string {
	if v == "" {
		return "none"
	}
	return v
}

func (c *chart) polyline(class string, xs, ys []float64) {
	var pts []string
	for i := range xs {
		if finite(xs[i]) && finite(ys[i]) {
			pts = append(pts, f1(c.px(xs[i]))+","+f1(c.py(ys[i])))
		}
	}
	if len(pts) > 1 {
		fmt.Fprintf(&c.b, `<polyline class="%s" points="%s"/>`, class, strings.Join(pts, " "))
	}
}

// ribbon fills between lower and upper over xs.
func (c *chart) ribbon(class string, xs, lo, hi []float64) {
	var up, down []string
	for i := range xs {
		if finite(xs[i]) && finite(lo[i]) && finite(hi[i]) {
			up = append(up, f1(c.px(xs[i]))+","+f1(c.py(hi[i])))
			down = append(down, f1(c.px(xs[i]))+","+f1(c.py(lo[i])))
		}
	}
	if len(up) < 2 {
		return
	}
	for i, j := 0, len(down)-1; i < j; i, j = i+1, j-1 {
		down[i], down[j] = down[j], down[i]
	}
	fmt.Fprintf(&c.b, `<polygon class="%s" points="%s %s"/>`, class, strings.Join(up, " "), strings.Join(down, " "))
}

func (c *chart) done() template.HTML {
	c.b.WriteString(`</svg>`)
	return template.HTML(c.b.String())
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func floats(v []view.Float) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = float64(x)
	}
	return out
}

func pointTitle(p view.Point) string {
	return fmt.Sprintf("%s:%d  %s\ny = %s, fitted %s\nleverage %s, t = %s, Cook's D = %s",
		p.File, p.Line, verdictOr(p.Verdict), num(p.Y), num(p.Fitted), num(p.Leverage), num(p.StudentizedExternal), num(p.Cook))
}

// num formats a diagnostic for people: 4 significant digits, "—" for undefined.
func num(v view.Float) string {
	if !v.Finite() {
		return "—"
	}
	f := float64(v)
	if f != 0 && (math.Abs(f) >= 1e6 || math.Abs(f) < 1e-3) {
		return strconv.FormatFloat(f, 'e', 3, 64)
	}
	return strconv.FormatFloat(f, 'g', 4, 64)
}

// fitChart draws the response against one predictor: the fitted curve
// with its confidence band, the points by verdict, and the suggested
// collection points as marks on the predictor axis.
func fitChart(d view.ModelDetail, predictor string) template.HTML {
	var xs, ys []float64
	for _, p := range d.Points {
		xs = append(xs, float64(p.X[predictor]))
		ys = append(ys, float64(p.Y))
	}
	curve, hasCurve := d.Curve(predictor)
	if hasCurve {
		xs = append(xs, floats(curve.X)...)
		ys = append(ys, floats(curve.Lower)...)
		ys = append(ys, floats(curve.Upper)...)
	}
	var sx []float64
	for _, s := range d.Suggestions {
		if v, ok := s.At[predictor]; ok && v.Finite() {
			sx = append(sx, float64(v))
		}
	}
	xs = append(xs, sx...)
	c := newChart("fit", 960, 380, xs, ys)
	c.axes(predictor, d.Response, false)
	if hasCurve {
		c.open("curve-layer")
		cx := floats(curve.X)
		c.ribbon("band", cx, floats(curve.Lower), floats(curve.Upper))
		c.polyline("curve", cx, floats(curve.Y))
		c.close()
	}
	c.b.WriteString(`<g class="suggest-layer">`)
	for i, s := range d.Suggestions {
		v, ok := s.At[predictor]
		if !ok || !v.Finite() {
			continue
		}
		x := c.px(float64(v))
		yb := c.h - c.mb
		fmt.Fprintf(&c.b, `<line class="suggest-guide" x1="%s" y1="%s" x2="%s" y2="%s"/>`, f1(x), f1(c.mt), f1(x), f1(yb))
		fmt.Fprintf(&c.b, `<path class="suggest" data-suggest="%d" d="M%s %sl6 9h-12z"><title>%s</title></path>`,
			i, f1(x), f1(yb-9), html.EscapeString(s.Text))
	}
	c.b.WriteString(`</g>`)
	c.open("points")
	drawn, _ := view.ThinPoints(d.Points, MaxDrawn)
	for _, p := range drawn {
		c.marker(float64(p.X[predictor]), float64(p.Y), p.Verdict, p.Row, pointTitle(p))
	}
	c.close()
	return c.done()
}

// influenceChart draws externally studentized residuals against leverage
// with the 2p/n line and the ±Bonferroni critical |t| lines.
func influenceChart(d view.ModelDetail) template.HTML {
	xs := []float64{0, float64(d.Cutoffs.Leverage)}
	tc := float64(d.Cutoffs.TCritical)
	ys := []float64{tc, -tc}
	for _, p := range d.Points {
		xs = append(xs, float64(p.Leverage))
		ys = append(ys, float64(p.StudentizedExternal))
	}
	c := newChart("influence", 640, 360, xs, ys)
	c.axes("leverage h", "studentized residual t", false)
	if c.y0 < 0 && c.y1 > 0 {
		py := c.py(0)
		fmt.Fprintf(&c.b, `<line class="zero" x1="%s" y1="%s" x2="%s" y2="%s"/>`, f1(c.ml), f1(py), f1(c.w-c.mr), f1(py))
	}
	c.vline(float64(d.Cutoffs.Leverage), "leverage", "2p/n = "+num(d.Cutoffs.Leverage))
	c.hline(tc, "t-upper", "+"+num(d.Cutoffs.TCritical)+" Bonferroni")
	c.hline(-tc, "t-lower", "−"+num(d.Cutoffs.TCritical))
	c.open("points")
	drawn, _ := view.ThinPoints(d.Points, MaxDrawn)
	for _, p := range drawn {
		c.marker(float64(p.Leverage), float64(p.StudentizedExternal), p.Verdict, p.Row, pointTitle(p))
	}
	c.close()
	return c.done()
}

// cooksChart draws Cook's distance by observation with its cutoff lines.
func cooksChart(d view.ModelDetail) template.HTML {
	xs := []float64{0, float64(max(len(d.Points), 1) + 1)}
	ys := []float64{0, float64(d.Cutoffs.CookSizeAdjusted)}
	for _, p := range d.Points {
		ys = append(ys, float64(p.Cook))
	}
	if a := float64(d.Cutoffs.CookAbsolute); finite(a) && a < 3*maxOf(ys) {
		ys = append(ys, a)
	}
	c := newChart("cooks", 640, 300, xs, ys)
	c.y0 = 0
	c.x0 = 0.5 - 0.02*float64(len(d.Points))
	c.axes("observation (row of the fit)", "Cook's distance", true)
	c.hline(float64(d.Cutoffs.CookSizeAdjusted), "cook-size", "4/n = "+num(d.Cutoffs.CookSizeAdjusted))
	c.hline(float64(d.Cutoffs.CookAbsolute), "cook-absolute", "absolute "+num(d.Cutoffs.CookAbsolute))
	c.open("points")
	stems := len(d.Points) <= 400
	drawn, _ := view.ThinPoints(d.Points, MaxDrawn)
	for _, p := range drawn {
		x := float64(p.Row + 1)
		if stems && p.Cook.Finite() {
			fmt.Fprintf(&c.b, `<line class="stem v-%s" x1="%s" y1="%s" x2="%s" y2="%s"/>`,
				verdictOr(p.Verdict), f1(c.px(x)), f1(c.py(0)), f1(c.px(x)), f1(c.py(float64(p.Cook))))
		}
		c.marker(x, float64(p.Cook), p.Verdict, p.Row, pointTitle(p))
	}
	c.close()
	return c.done()
}

func maxOf(v []float64) float64 {
	m := 0.0
	for _, x := range v {
		if finite(x) {
			m = math.Max(m, x)
		}
	}
	return m
}

// historyChart draws one coefficient across the fit history: the estimate
// with ±1.96 SE and the drift band around the baseline.
func historyChart(fits []view.FitView, term string, band *view.DriftBand) template.HTML {
	var xs, ys, lo, hi []float64
	for i, f := range fits {
		j := -1
		for k, t := range f.Terms {
			if t == term {
				j = k
			}
		}
		if j < 0 || j >= len(f.Estimates) {
			continue
		}
		e := float64(f.Estimates[j])
		if !finite(e) {
			continue
		}
		se := math.NaN()
		if j < len(f.StdErrors) {
			se = float64(f.StdErrors[j])
		}
		xs = append(xs, float64(i+1))
		ys = append(ys, e)
		lo = append(lo, e-1.96*se)
		hi = append(hi, e+1.96*se)
	}
	all := append(append([]float64{}, ys...), lo...)
	all = append(all, hi...)
	if band != nil {
		all = append(all, float64(band.Lower), float64(band.Upper), float64(band.Baseline))
	}
	c := newChart("history", 420, 240, append([]float64{1}, xs...), clampSpread(all, ys))
	c.ml = 62
	fmt.Fprintf(&c.b, `<desc data-term="%s"></desc>`, html.EscapeString(term))
	c.axes("fit (oldest → newest)", term, true)
	if band != nil && band.Lower.Finite() && band.Upper.Finite() {
		y1, y2 := c.py(math.Min(float64(band.Upper), c.y1)), c.py(math.Max(float64(band.Lower), c.y0))
		fmt.Fprintf(&c.b, `<rect class="drift-band" x="%s" y="%s" width="%s" height="%s"/>`,
			f1(c.ml), f1(y1), f1(c.w-c.ml-c.mr), f1(math.Max(y2-y1, 0)))
		c.hline(float64(band.Upper), "drift-upper", "drift band")
		c.hline(float64(band.Lower), "drift-lower", "")
		c.hline(float64(band.Baseline), "drift-baseline", "baseline")
	}
	c.open("series")
	c.ribbon("se-band", xs, lo, hi)
	c.polyline("estimate", xs, ys)
	for i := range xs {
		fmt.Fprintf(&c.b, `<circle class="pt hist" cx="%s" cy="%s" r="2.4"><title>fit %d: %s = %s</title></circle>`,
			f1(c.px(xs[i])), f1(c.py(ys[i])), i+1, html.EscapeString(term), num(view.Float(ys[i])))
	}
	c.close()
	return c.done()
}

// clampSpread keeps the y range from being swamped by the huge standard
// errors of the first few fits: the range is limited to the estimates'
// spread widened three times, unless the band values lie within it.
func clampSpread(all, est []float64) []float64 {
	lo, hi := padRange(est)
	w := hi - lo
	var out []float64
	for _, v := range all {
		if v >= lo-3*w && v <= hi+3*w {
			out = append(out, v)
		}
	}
	return out
}
