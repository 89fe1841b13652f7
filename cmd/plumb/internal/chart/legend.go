package chart

// legendEntry is one key of the legend above the plot.
type legendEntry struct {
	label  string
	swatch func(x, y float64) shape // centred at (x, y)
}

// legendSlack widens the measured label: a browser may set the labels in
// a broader face than the Liberation Sans they are measured in.
const legendSlack = 1.12

const (
	legendRow    = 17
	legendSwatch = 16
	legendGap    = 14
)

func legendOf(layers []Layer) []legendEntry {
	var out []legendEntry
	add := func(label string, sw func(x, y float64) shape) {
		if label != "" {
			out = append(out, legendEntry{label, sw})
		}
	}
	for _, ly := range layers {
		switch ly := ly.(type) {
		case Points:
			if !ly.Legend {
				continue
			}
			for _, lk := range verdictLooks {
				if hasVerdict(ly.Marks, lk.word) {
					add(lk.word, func(x, y float64) shape { return glyphShape(lk, x, y, false) })
				}
			}
		case Band:
			add(ly.Legend, fillSwatch(ly.Tone))
		case Span:
			add(ly.Legend, fillSwatch(ly.Tone))
		case Line:
			add(ly.Legend, strokeSwatch(ly.Tone, ly.Dash))
		case Rule:
			add(ly.Legend, strokeSwatch(ly.Tone, ly.Dash))
		case AxisMarks:
			add(ly.Legend, func(x, y float64) shape {
				return shape{elem: "path", subs: [][]pt{triangle(x, y, 5.5)}, closed: true, fill: green}
			})
		}
	}
	return out
}

func hasVerdict(ms []Mark, word string) bool {
	for _, m := range ms {
		if lookOf(m.Verdict).word == word {
			return true
		}
	}
	return false
}

func fillSwatch(t Tone) func(x, y float64) shape {
	fill, _, _ := tonePaint(t)
	return func(x, y float64) shape {
		return shape{elem: "rect", subs: [][]pt{{{x - 7, y - 5}, {x + 7, y - 5}, {x + 7, y + 5}, {x - 7, y + 5}}}, closed: true, fill: fill}
	}
}

func strokeSwatch(t Tone, d Dash) func(x, y float64) shape {
	_, stroke, w := tonePaint(t)
	return func(x, y float64) shape {
		return shape{elem: "path", subs: [][]pt{{{x - 8, y}, {x + 8, y}}}, stroke: stroke, width: w, dash: dashPattern(d)}
	}
}

// legendRows splits the entries into rows that fit the plot's width.
func (l *layout) legendRows() [][]legendEntry {
	var rows [][]legendEntry
	var row []legendEntry
	w := 0.0
	avail := l.Width - l.ml - l.mr
	for _, e := range l.legend {
		ew := legendSwatch + 4 + legendSlack*textWidth(e.label, sizeLegend)
		if len(row) > 0 && w+legendGap+ew > avail {
			rows, row, w = append(rows, row), nil, 0
		}
		if len(row) > 0 {
			w += legendGap
		}
		row, w = append(row, e), w+ew
	}
	if len(row) > 0 {
		rows = append(rows, row)
	}
	return rows
}

func (l *layout) legendHeight() float64 {
	return float64(len(l.legendRows())) * legendRow
}

// drawLegend writes the keys in rows above the plot, left-aligned with it.
func (l *layout) drawLegend(c canvas) {
	rows := l.legendRows()
	if len(rows) == 0 {
		return
	}
	c.group(`class="legend"`)
	top := l.mt - l.legendHeight() - 4
	for i, row := range rows {
		y := top + float64(i)*legendRow + legendRow/2
		x := l.ml
		for _, e := range row {
			c.shape(e.swatch(x+legendSwatch/2, y))
			c.text(text{x: x + legendSwatch + 4, y: y + 3.8, s: e.label, size: sizeLegend, colour: muted, anchor: "start"})
			x += legendSwatch + 4 + legendSlack*textWidth(e.label, sizeLegend) + legendGap
		}
	}
	c.endGroup()
}
