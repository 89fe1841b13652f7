package chart

import (
	"fmt"
	"html"
	"image/color"
	"math"
	"strconv"
)

// canvas is what a chart is drawn on: the SVG writer or the PNG painter.
// Coordinates are pixels from the top left.
type canvas interface {
	// group opens a group with the given raw attributes.
	group(attrs string)
	endGroup()
	shape(s shape)
	text(t text)
}

type pt struct{ x, y float64 }

// shape is one drawn element. elem is the SVG element it becomes
// ("path", "polyline", "polygon", "rect"); the PNG draws them all as paths.
type shape struct {
	elem   string
	subs   [][]pt // subpaths
	closed bool
	circle bool // subs[0][0] is the centre, r the radius
	r      float64
	fill   color.NRGBA // A = 0: none
	stroke color.NRGBA
	width  float64
	dash   []float64
	attrs  string // class and data attributes
	title  string
}

type text struct {
	x, y   float64
	s      string
	size   float64
	colour color.NRGBA
	anchor string // start, middle, end
	rotate bool   // -90°, reading upwards
	class  string
}

// layout is a spec placed on its canvas.
type layout struct {
	Spec
	ml, mr, mt, mb float64
	x0, x1, y0, y1 float64
	legend         []legendEntry
}

func (l *layout) px(x float64) float64 {
	return l.ml + (x-l.x0)/(l.x1-l.x0)*(l.Width-l.ml-l.mr)
}

func (l *layout) py(y float64) float64 {
	return l.Height - l.mb - (y-l.y0)/(l.y1-l.y0)*(l.Height-l.mt-l.mb)
}

func (l *layout) right() float64  { return l.Width - l.mr }
func (l *layout) bottom() float64 { return l.Height - l.mb }

func place(s Spec) *layout {
	l := &layout{Spec: s, ml: 58, mr: 16, mt: 12, mb: 44}
	if s.Width <= 0 || s.Height <= 0 {
		l.Width, l.Height = 640, 360
	}
	var xs, ys []float64
	for _, ly := range s.Layers {
		xs, ys = ly.extent(xs, ys)
	}
	l.x0, l.x1 = axisRange(s.X, xs)
	l.y0, l.y1 = axisRange(s.Y, ys)
	if s.Title != "" {
		l.mt += 20
	}
	l.legend = legendOf(s.Layers)
	l.mt += l.legendHeight()
	return l
}

// axisRange covers the finite values and Include with 6 % margins, then
// applies the fixed ends.
func axisRange(a Axis, data []float64) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, vs := range [][]float64{data, a.Include} {
		for _, v := range vs {
			if finite(v) {
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
		}
	}
	switch {
	case math.IsInf(lo, 1):
		lo, hi = 0, 1
	case hi == lo:
		d := math.Max(math.Abs(lo)*0.1, 1)
		lo, hi = lo-d, hi+d
	default:
		pad := (hi - lo) * 0.06
		lo, hi = lo-pad, hi+pad
	}
	if a.Min.Set {
		lo = a.Min.V
	}
	if a.Max.Set {
		hi = a.Max.V
	}
	if !(hi > lo) {
		d := math.Max(math.Abs(lo)*0.1, 1)
		hi = lo + d
	}
	return lo, hi
}

// niceTicks returns about n round values within [lo, hi].
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

func f1(v float64) string { return strconv.FormatFloat(v, 'f', 1, 64) }

// draw paints the whole chart: the plot area and its grid, the layers,
// the margins painted over (so nothing drawn spills outside the plot; no
// clip path, which would be a url() reference), then the frame, ticks,
// titles and legend.
func (l *layout) draw(c canvas) {
	l.background(c)
	c.group(`class="layers"`)
	for depth := range 3 {
		for _, ly := range l.Layers {
			if ly.depth() == depth {
				ly.paint(l, c)
			}
		}
	}
	c.endGroup()
	l.mask(c)
	l.axes(c)
	l.drawLegend(c)
}

func (l *layout) area() []pt {
	return []pt{{l.ml, l.mt}, {l.right(), l.mt}, {l.right(), l.bottom()}, {l.ml, l.bottom()}}
}

func (l *layout) xTicks() []float64 { return l.ticks(l.x0, l.x1, 6, l.X.Integer) }
func (l *layout) yTicks() []float64 { return l.ticks(l.y0, l.y1, 5, l.Y.Integer) }

func (l *layout) ticks(lo, hi float64, n int, integer bool) []float64 {
	var out []float64
	for _, t := range niceTicks(lo, hi, n) {
		if !integer || t == math.Trunc(t) {
			out = append(out, t)
		}
	}
	return out
}

// background fills the plot area and draws the grid.
func (l *layout) background(c canvas) {
	c.group(`class="grid"`)
	c.shape(shape{elem: "rect", subs: [][]pt{l.area()}, closed: true, fill: paper})
	for _, t := range l.xTicks() {
		x := l.px(t)
		c.shape(shape{elem: "path", subs: [][]pt{{{x, l.mt}, {x, l.bottom()}}}, stroke: grid, width: 1, attrs: `class="gridline"`})
	}
	for _, t := range l.yTicks() {
		y := l.py(t)
		c.shape(shape{elem: "path", subs: [][]pt{{{l.ml, y}, {l.right(), y}}}, stroke: grid, width: 1, attrs: `class="gridline"`})
	}
	c.endGroup()
}

// mask paints the margins around the plot area with the paper colour.
func (l *layout) mask(c canvas) {
	r := func(x0, y0, x1, y1 float64) {
		c.shape(shape{elem: "rect", subs: [][]pt{{{x0, y0}, {x1, y0}, {x1, y1}, {x0, y1}}}, closed: true, fill: paper})
	}
	c.group(`class="mask"`)
	r(0, 0, l.Width, l.mt)
	r(0, l.bottom(), l.Width, l.Height)
	r(0, l.mt, l.ml, l.bottom())
	r(l.right(), l.mt, l.Width, l.bottom())
	c.endGroup()
}

// axes draws the frame, tick labels and axis titles.
func (l *layout) axes(c canvas) {
	c.group(`class="axes"`)
	c.shape(shape{elem: "rect", subs: [][]pt{l.area()}, closed: true, stroke: frame, width: 1, attrs: `class="plotarea"`})
	for _, t := range l.xTicks() {
		c.text(text{x: l.px(t), y: l.bottom() + 15, s: tickLabel(t), size: sizeTick, colour: muted, anchor: "middle", class: "tick"})
	}
	for _, t := range l.yTicks() {
		c.text(text{x: l.ml - 6, y: l.py(t) + 3.5, s: tickLabel(t), size: sizeTick, colour: muted, anchor: "end", class: "tick"})
	}
	c.text(text{x: l.ml + (l.right()-l.ml)/2, y: l.Height - 8, s: l.X.Title(), size: sizeAxis, colour: ink, anchor: "middle", class: "axis-title"})
	c.text(text{x: 14, y: l.mt + (l.bottom()-l.mt)/2, s: l.Y.Title(), size: sizeAxis, colour: ink, anchor: "middle", rotate: true, class: "axis-title"})
	if l.Title != "" {
		c.text(text{x: l.ml, y: 17, s: l.Title, size: sizeTitle, colour: ink, anchor: "start", class: "chart-title"})
	}
	c.endGroup()
}

func (b Band) paint(l *layout, c canvas) {
	var up, down []pt
	for i := range b.X {
		if i < len(b.Lo) && i < len(b.Hi) && finite(b.X[i]) && finite(b.Lo[i]) && finite(b.Hi[i]) {
			up = append(up, pt{l.px(b.X[i]), l.py(b.Hi[i])})
			down = append(down, pt{l.px(b.X[i]), l.py(b.Lo[i])})
		}
	}
	if len(up) < 2 {
		return
	}
	for i := len(down) - 1; i >= 0; i-- {
		up = append(up, down[i])
	}
	fill, _, _ := tonePaint(b.Tone)
	c.shape(shape{elem: "polygon", subs: [][]pt{up}, closed: true, fill: fill, attrs: classAttr(b.Class)})
}

func (ln Line) paint(l *layout, c canvas) {
	var p []pt
	for i := range ln.X {
		if i < len(ln.Y) && finite(ln.X[i]) && finite(ln.Y[i]) {
			p = append(p, pt{l.px(ln.X[i]), l.py(ln.Y[i])})
		}
	}
	if len(p) < 2 {
		return
	}
	_, stroke, w := tonePaint(ln.Tone)
	c.shape(shape{elem: "polyline", subs: [][]pt{p}, stroke: stroke, width: w, dash: dashPattern(ln.Dash), attrs: classAttr(ln.Class)})
}

func (s Span) paint(l *layout, c canvas) {
	if !finite(s.Lo) || !finite(s.Hi) {
		return
	}
	top, bot := l.py(math.Min(math.Max(s.Lo, s.Hi), l.y1)), l.py(math.Max(math.Min(s.Lo, s.Hi), l.y0))
	if bot <= top {
		return
	}
	fill, _, _ := tonePaint(s.Tone)
	c.shape(shape{elem: "rect", subs: [][]pt{{{l.ml, top}, {l.right(), top}, {l.right(), bot}, {l.ml, bot}}}, closed: true, fill: fill, attrs: classAttr(s.Class)})
}

func (r Rule) paint(l *layout, c canvas) {
	if !finite(r.At) {
		return
	}
	class := r.Class
	if class == "" {
		class = "cutoff"
	}
	attrs := classAttr(class)
	if r.ID != "" {
		attrs += fmt.Sprintf(` data-cutoff="%s"`, html.EscapeString(r.ID))
	}
	_, stroke, w := tonePaint(r.Tone)
	w = math.Min(w, 1.4) // a rule is a reference, not data
	label := text{s: r.Label, size: sizeLabel, colour: stroke, class: "cutoff-label"}
	var seg []pt
	if r.Vertical {
		if r.At < l.x0 || r.At > l.x1 {
			return
		}
		x := l.px(r.At)
		seg = []pt{{x, l.mt}, {x, l.bottom()}}
		label.x, label.y, label.anchor = x+4, l.mt+12, "start"
		if x > l.right()-textWidth(r.Label, sizeLabel)-8 {
			label.x, label.anchor = x-4, "end"
		}
	} else {
		if r.At < l.y0 || r.At > l.y1 {
			return
		}
		y := l.py(r.At)
		seg = []pt{{l.ml, y}, {l.right(), y}}
		label.x, label.y, label.anchor = l.right()-4, y-4, "end"
	}
	c.shape(shape{elem: "path", subs: [][]pt{seg}, stroke: stroke, width: w, dash: dashPattern(r.Dash), attrs: attrs, title: r.Label})
	if r.Label != "" && r.Legend == "" {
		c.text(label)
	}
}

func (a AxisMarks) paint(l *layout, c canvas) {
	class := a.Class
	if class == "" {
		class = "suggest"
	}
	c.group(classAttr(class + "-layer"))
	for i, v := range a.At {
		if !finite(v) || v < l.x0 || v > l.x1 {
			continue
		}
		x := l.px(v)
		title := ""
		if i < len(a.Titles) {
			title = a.Titles[i]
		}
		c.shape(shape{elem: "path", subs: [][]pt{{{x, l.mt}, {x, l.bottom()}}}, stroke: alpha(green, 0x80), width: 1, dash: []float64{2, 4}, attrs: classAttr(class + "-guide")})
		c.shape(shape{elem: "path", subs: [][]pt{triangle(x, l.bottom()-4.5, 6)}, closed: true, fill: green, stroke: paper, width: 1,
			attrs: fmt.Sprintf(`class="%s" data-suggest="%d"`, class, i), title: title})
	}
	c.endGroup()
}

func (p Points) paint(l *layout, c canvas) {
	class := p.Class
	if class == "" {
		class = "points"
	}
	c.group(classAttr(class))
	for _, m := range p.Marks {
		if !finite(m.X) || !finite(m.Y) {
			continue
		}
		x, y := l.px(m.X), l.py(m.Y)
		if p.Series {
			_, stroke, _ := tonePaint(ToneInk)
			c.shape(shape{elem: "path", circle: true, subs: [][]pt{{{x, y}}}, r: 2.4, fill: stroke, attrs: `class="pt hist"`, title: m.Title})
			continue
		}
		lk := lookOf(m.Verdict)
		if p.Stems && finite(m.Y) {
			st := stemTone
			if lk.stem {
				st = lk.colour
			}
			y0 := l.py(math.Max(l.y0, math.Min(0, l.y1)))
			c.shape(shape{elem: "path", subs: [][]pt{{{x, y0}, {x, y}}}, stroke: st, width: 1, attrs: fmt.Sprintf(`class="stem v-%s"`, lk.word)})
		}
		if m.Highlight {
			c.shape(shape{elem: "path", circle: true, subs: [][]pt{{{x, y}}}, r: lk.r + 5, stroke: ink, width: 1.5, attrs: `class="highlight"`})
		}
		s := glyphShape(lk, x, y, m.Hollow)
		s.attrs = fmt.Sprintf(`class="pt v-%s" data-row="%d"`, lk.word, m.Row)
		if m.Hollow {
			s.attrs = fmt.Sprintf(`class="pt v-%s hollow" data-row="%d"`, lk.word, m.Row)
		}
		s.title = m.Title
		c.shape(s)
	}
	c.endGroup()
}

// glyphShape draws a verdict's glyph centred at (x, y).
func glyphShape(lk verdictLook, x, y float64, hollow bool) shape {
	s := shape{elem: "path", closed: true, fill: alpha(lk.colour, 0xd0)}
	r := lk.r
	switch lk.glyph {
	case glyphDot:
		s.circle, s.subs, s.r = true, [][]pt{{{x, y}}}, r
		s.fill = alpha(lk.colour, 0xb0)
		if lk.word == "none" {
			s.fill = lk.colour
		}
	case glyphRing:
		s.circle, s.subs, s.r = true, [][]pt{{{x, y}}}, r
		s.fill, s.stroke, s.width = color.NRGBA{}, lk.colour, 1.8
	case glyphTriangle:
		s.subs = [][]pt{triangle(x, y, r)}
	case glyphDiamond:
		s.subs = [][]pt{{{x, y - r}, {x + r, y}, {x, y + r}, {x - r, y}}}
	case glyphSquare:
		s.subs = [][]pt{{{x - r, y - r}, {x + r, y - r}, {x + r, y + r}, {x - r, y + r}}}
		s.fill, s.stroke, s.width = lk.colour, paper, 1
	}
	if hollow {
		s.fill, s.stroke, s.width = color.NRGBA{}, lk.colour, 1.5
	}
	return s
}

// triangle points up with its centre at (x, y) and half height r.
func triangle(x, y, r float64) []pt {
	return []pt{{x, y - r}, {x + r, y + 0.7*r}, {x - r, y + 0.7*r}}
}

func classAttr(class string) string {
	if class == "" {
		return ""
	}
	return `class="` + html.EscapeString(class) + `"`
}
