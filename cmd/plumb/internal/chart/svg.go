package chart

import (
	"fmt"
	"html"
	"html/template"
	"image/color"
	"io"
	"strings"
)

// svgCanvas writes the chart as SVG markup.
type svgCanvas struct {
	b strings.Builder
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

func (c *svgCanvas) group(attrs string) {
	c.b.WriteString("<g")
	if attrs != "" {
		c.b.WriteString(" " + attrs)
	}
	c.b.WriteString(">")
}

func (c *svgCanvas) endGroup() { c.b.WriteString("</g>") }

func (c *svgCanvas) shape(s shape) {
	b := &c.b
	b.WriteString("<" + s.elem)
	if s.attrs != "" {
		b.WriteString(" " + s.attrs)
	}
	switch {
	case s.circle:
		p := s.subs[0][0]
		fmt.Fprintf(b, ` d="M%s %sa%s %s 0 1 0 %s 0a%s %s 0 1 0 -%s 0z"`,
			f1(p.x-s.r), f1(p.y), f1(s.r), f1(s.r), f1(2*s.r), f1(s.r), f1(s.r), f1(2*s.r))
	case s.elem == "rect":
		p := s.subs[0]
		fmt.Fprintf(b, ` x="%s" y="%s" width="%s" height="%s"`, f1(p[0].x), f1(p[0].y), f1(p[2].x-p[0].x), f1(p[2].y-p[0].y))
	case s.elem == "polyline" || s.elem == "polygon":
		b.WriteString(` points="`)
		for i, p := range s.subs[0] {
			if i > 0 {
				b.WriteByte(' ')
			}
			b.WriteString(f1(p.x) + "," + f1(p.y))
		}
		b.WriteByte('"')
	default:
		b.WriteString(` d="`)
		for _, sub := range s.subs {
			for i, p := range sub {
				if i == 0 {
					b.WriteString("M")
				} else {
					b.WriteString("L")
				}
				b.WriteString(f1(p.x) + " " + f1(p.y))
			}
			if s.closed {
				b.WriteString("z")
			}
		}
		b.WriteByte('"')
	}
	paintAttr(b, "fill", s.fill)
	if s.stroke.A > 0 && s.width > 0 {
		paintAttr(b, "stroke", s.stroke)
		fmt.Fprintf(b, ` stroke-width="%g"`, s.width)
		if len(s.dash) > 0 {
			fmt.Fprintf(b, ` stroke-dasharray="%g %g"`, s.dash[0], s.dash[1])
		}
	}
	if s.title == "" {
		b.WriteString("/>")
		return
	}
	fmt.Fprintf(b, "><title>%s</title></%s>", html.EscapeString(s.title), s.elem)
}

func paintAttr(b *strings.Builder, name string, c color.NRGBA) {
	if c.A == 0 {
		b.WriteString(` ` + name + `="none"`)
		return
	}
	fmt.Fprintf(b, ` %s="%s"`, name, hex(c))
	if c.A != 0xff {
		fmt.Fprintf(b, ` %s-opacity="%.3g"`, name, float64(c.A)/255)
	}
}

func hex(c color.NRGBA) string { return fmt.Sprintf("#%02x%02x%02x", c.R, c.G, c.B) }

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
