package chart

import (
	"bytes"
	"fmt"
	"html"
	"html/template"
	"image/color"
	"io"
	"strconv"
)

// svgCanvas writes the chart as SVG markup.
type svgCanvas struct {
	b bytes.Buffer
}

// HTML renders the chart as an <svg> element for embedding in a page.
func (s Spec) HTML() template.HTML {
	return template.HTML(s.svg())
}

// WriteSVG writes the chart as a standalone SVG file.
func (s Spec) WriteSVG(w io.Writer) error {
	_, err := io.WriteString(w, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n"+s.svg()+"\n")
	return err
}

func (s Spec) svg() string {
	l := place(s)
	c := &svgCanvas{}
	c.b.Grow(svgSize(s))
	b := &c.b
	fmt.Fprintf(b, `<svg xmlns="http://www.w3.org/2000/svg" class="chart" data-chart="%s" viewBox="0 0 %g %g" width="%g" height="%g" role="img" aria-label="%s" preserveAspectRatio="xMidYMid meet" font-family="%s">`,
		html.EscapeString(s.Name), l.Width, l.Height, l.Width, l.Height, html.EscapeString(s.Label), html.EscapeString(fontFamily))
	if len(s.Meta) > 0 {
		b.WriteString("<desc")
		for _, kv := range s.Meta {
			fmt.Fprintf(b, ` data-%s="%s"`, html.EscapeString(kv[0]), html.EscapeString(kv[1]))
		}
		b.WriteString("></desc>")
	}
	fmt.Fprintf(b, `<rect width="100%%" height="100%%" fill="%s"/>`, hex(paper))
	l.draw(c)
	b.WriteString("</svg>")
	return b.String()
}

// svgSize guesses the length of the SVG: about 300 bytes a mark.
func svgSize(s Spec) int {
	n := 8 << 10
	for _, ly := range s.Layers {
		if p, ok := ly.(Points); ok {
			n += 300 * len(p.Marks)
		}
	}
	return n
}

func (c *svgCanvas) group(attrs string) {
	c.b.WriteString("<g")
	if attrs != "" {
		c.b.WriteString(" " + attrs)
	}
	c.b.WriteString(">")
}

func (c *svgCanvas) endGroup() { c.b.WriteString("</g>") }

func (c *svgCanvas) shape(s shape) {
	b := c.b.AvailableBuffer()
	b = append(b, '<')
	b = append(b, s.elem...)
	if s.attrs != "" {
		b = append(b, ' ')
		b = append(b, s.attrs...)
	}
	switch {
	case s.circle:
		p := s.subs[0][0]
		b = append(b, ` d="M`...)
		b = num1(b, p.x-s.r)
		b = append(b, ' ')
		b = num1(b, p.y)
		for _, dx := range [2]float64{2 * s.r, -2 * s.r} {
			b = append(b, 'a')
			b = num1(b, s.r)
			b = append(b, ' ')
			b = num1(b, s.r)
			b = append(b, " 0 1 0 "...)
			b = num1(b, dx)
			b = append(b, " 0"...)
		}
		b = append(b, `z"`...)
	case s.elem == "rect":
		p := s.subs[0]
		b = append(b, ` x="`...)
		b = num1(b, p[0].x)
		b = append(b, `" y="`...)
		b = num1(b, p[0].y)
		b = append(b, `" width="`...)
		b = num1(b, p[2].x-p[0].x)
		b = append(b, `" height="`...)
		b = num1(b, p[2].y-p[0].y)
		b = append(b, '"')
	case s.elem == "polyline" || s.elem == "polygon":
		b = append(b, ` points="`...)
		for i, p := range s.subs[0] {
			if i > 0 {
				b = append(b, ' ')
			}
			b = num1(b, p.x)
			b = append(b, ',')
			b = num1(b, p.y)
		}
		b = append(b, '"')
	default:
		b = append(b, ` d="`...)
		for _, sub := range s.subs {
			for i, p := range sub {
				if i == 0 {
					b = append(b, 'M')
				} else {
					b = append(b, 'L')
				}
				b = num1(b, p.x)
				b = append(b, ' ')
				b = num1(b, p.y)
			}
			if s.closed {
				b = append(b, 'z')
			}
		}
		b = append(b, '"')
	}
	b = paintAttr(b, "fill", s.fill)
	if s.stroke.A > 0 && s.width > 0 {
		b = paintAttr(b, "stroke", s.stroke)
		b = append(b, ` stroke-width="`...)
		b = strconv.AppendFloat(b, s.width, 'g', -1, 64)
		b = append(b, '"')
		if len(s.dash) > 0 {
			b = append(b, ` stroke-dasharray="`...)
			b = strconv.AppendFloat(b, s.dash[0], 'g', -1, 64)
			b = append(b, ' ')
			b = strconv.AppendFloat(b, s.dash[1], 'g', -1, 64)
			b = append(b, '"')
		}
	}
	if s.title == "" {
		b = append(b, "/>"...)
	} else {
		b = append(b, "><title>"...)
		c.b.Write(b)
		template.HTMLEscape(&c.b, []byte(s.title))
		b = c.b.AvailableBuffer()
		b = append(b, "</title></"...)
		b = append(b, s.elem...)
		b = append(b, '>')
	}
	c.b.Write(b)
}

// num1 appends v with one decimal.
func num1(b []byte, v float64) []byte { return strconv.AppendFloat(b, v, 'f', 1, 64) }

func paintAttr(b []byte, name string, c color.NRGBA) []byte {
	b = append(b, ' ')
	b = append(b, name...)
	if c.A == 0 {
		return append(b, `="none"`...)
	}
	b = append(b, `="`...)
	b = appendHex(b, c)
	b = append(b, '"')
	if c.A != 0xff {
		b = append(b, ' ')
		b = append(b, name...)
		b = append(b, `-opacity="`...)
		b = strconv.AppendFloat(b, float64(c.A)/255, 'g', 3, 64)
		b = append(b, '"')
	}
	return b
}

func appendHex(b []byte, c color.NRGBA) []byte {
	const digits = "0123456789abcdef"
	return append(b, '#', digits[c.R>>4], digits[c.R&15], digits[c.G>>4], digits[c.G&15], digits[c.B>>4], digits[c.B&15])
}

func hex(c color.NRGBA) string { return string(appendHex(nil, c)) }

func (c *svgCanvas) text(t text) {
	if t.s == "" {
		return
	}
	b := &c.b
	b.WriteString("<text")
	if t.class != "" {
		b.WriteString(" " + classAttr(t.class))
	}
	if t.rotate {
		fmt.Fprintf(b, ` transform="translate(%s %s) rotate(-90)"`, f1(t.x), f1(t.y))
	} else {
		fmt.Fprintf(b, ` x="%s" y="%s"`, f1(t.x), f1(t.y))
	}
	if t.anchor != "" && t.anchor != "start" {
		fmt.Fprintf(b, ` text-anchor="%s"`, t.anchor)
	}
	fmt.Fprintf(b, ` font-size="%g" fill="%s">%s</text>`, t.size, hex(t.colour), html.EscapeString(t.s))
}

// Swatch is a verdict's mark as a small inline <svg> (for a legend in
// HTML); "suggest" gives the collection mark.
func Swatch(verdict string) template.HTML {
	c := &svgCanvas{}
	c.b.WriteString(`<svg class="swatch" viewBox="-7 -7 14 14" aria-hidden="true">`)
	if verdict == "suggest" {
		c.shape(shape{elem: "path", subs: [][]pt{triangle(0, 0, 5.5)}, closed: true, fill: green})
	} else {
		c.shape(glyphShape(lookOf(verdict), 0, 0, false))
	}
	c.b.WriteString(`</svg>`)
	return template.HTML(c.b.String())
}
