package chart

import (
	"io"
	"math"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/vgimg"
)

// pngDPI draws each CSS pixel (one point) as two image pixels.
const pngDPI = 144

// WritePNG writes the chart as a PNG image, two pixels per CSS pixel,
// drawn with gonum/plot's raster canvas from the same layout as the SVG.
func (s Spec) WritePNG(w io.Writer) error {
	l := place(s)
	img := vgimg.NewWith(vgimg.UseWH(vg.Length(l.Width), vg.Length(l.Height)), vgimg.UseDPI(pngDPI), vgimg.UseBackgroundColor(paper))
	c := &pngCanvas{c: img, h: l.Height}
	l.draw(c)
	_, err := vgimg.PngCanvas{Canvas: img}.WriteTo(w)
	return err
}

// pngCanvas draws on a gonum/plot vg canvas, whose origin is the bottom
// left: y is flipped.
type pngCanvas struct {
	c *vgimg.Canvas
	h float64
}

func (c *pngCanvas) group(string) {}
func (c *pngCanvas) endGroup()    {}

func (c *pngCanvas) at(p pt) vg.Point {
	return vg.Point{X: vg.Length(p.x), Y: vg.Length(c.h - p.y)}
}

func (c *pngCanvas) path(s shape) vg.Path {
	var p vg.Path
	if s.circle {
		ctr := c.at(s.subs[0][0])
		p.Move(vg.Point{X: ctr.X + vg.Length(s.r), Y: ctr.Y})
		p.Arc(ctr, vg.Length(s.r), 0, 2*math.Pi)
		p.Close()
		return p
	}
	for _, sub := range s.subs {
		for i, q := range sub {
			if i == 0 {
				p.Move(c.at(q))
			} else {
				p.Line(c.at(q))
			}
		}
		if s.closed {
			p.Close()
		}
	}
	return p
}

func (c *pngCanvas) shape(s shape) {
	p := c.path(s)
	if s.fill.A > 0 {
		c.c.SetColor(s.fill)
		c.c.Fill(p)
	}
	if s.stroke.A > 0 && s.width > 0 {
		c.c.SetColor(s.stroke)
		c.c.SetLineWidth(vg.Length(s.width))
		var dash []vg.Length
		for _, d := range s.dash {
			dash = append(dash, vg.Length(d))
		}
		c.c.SetLineDash(dash, 0)
		c.c.Stroke(p)
		c.c.SetLineDash(nil, 0)
	}
}

func (c *pngCanvas) text(t text) {
	if t.s == "" {
		return
	}
	f := face(t.size)
	w := float64(f.Width(t.s))
	dx := 0.0
	switch t.anchor {
	case "middle":
		dx = -w / 2
	case "end":
		dx = -w
	}
	c.c.SetColor(t.colour)
	if !t.rotate {
		c.c.FillString(f, c.at(pt{t.x + dx, t.y}), t.s)
		return
	}
	c.c.Push()
	c.c.Translate(c.at(pt{t.x, t.y}))
	c.c.Rotate(math.Pi / 2)
	c.c.FillString(f, vg.Point{X: vg.Length(dx)}, t.s)
	c.c.Pop()
}
