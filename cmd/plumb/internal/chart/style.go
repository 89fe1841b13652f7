package chart

import (
	"image/color"

	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/font/liberation"
	"gonum.org/v1/plot/vg"

	"plumb/cmd/plumb/internal/view"
)

// The style: warm paper, slate ink, one green for the fit, a brown for
// cutoffs, and a colour and a shape per verdict. Every colour the charts
// use is here.
var (
	paper     = rgb(0xff, 0xfe, 0xfb)
	ink       = rgb(0x1f, 0x2a, 0x33)
	muted     = rgb(0x66, 0x71, 0x7a)
	frame     = rgb(0xd8, 0xd2, 0xc6)
	grid      = rgb(0xec, 0xe8, 0xdf)
	green     = rgb(0x2f, 0x6f, 0x62)
	cutColour = rgb(0x6d, 0x58, 0x43)
	stemTone  = rgb(0xc7, 0xc0, 0xb2)
)

func rgb(r, g, b uint8) color.NRGBA { return color.NRGBA{r, g, b, 0xff} }

func alpha(c color.NRGBA, a uint8) color.NRGBA { c.A = a; return c }

// tonePaint gives the fill (bands, spans) and the stroke (lines, rules)
// of a tone.
func tonePaint(t Tone) (fill color.NRGBA, stroke color.NRGBA, width float64) {
	switch t {
	case ToneFit:
		return alpha(green, 0x38), green, 2
	case TonePrediction:
		return alpha(green, 0x16), alpha(green, 0x90), 1
	case ToneSpread:
		return alpha(ink, 0x18), ink, 1.4
	case ToneDrift:
		return alpha(rgb(0xd9, 0xa4, 0x41), 0x2c), rgb(0xb9, 0xab, 0x94), 1
	case ToneCutoff:
		return alpha(cutColour, 0x20), cutColour, 1.2
	case ToneReference:
		return alpha(muted, 0x20), rgb(0xcf, 0xc8, 0xba), 1
	case ToneEvent:
		return alpha(muted, 0x20), rgb(0x4b, 0x5d, 0x8a), 1
	default: // ToneInk
		return alpha(ink, 0x20), ink, 1.4
	}
}

func dashPattern(d Dash) []float64 {
	switch d {
	case Dashed:
		return []float64{5, 4}
	case Dotted:
		return []float64{1.5, 3}
	}
	return nil
}

// shape is a verdict's glyph.
type glyph int

const (
	glyphDot glyph = iota
	glyphRing
	glyphTriangle
	glyphDiamond
	glyphSquare
)

type verdictLook struct {
	word   string
	colour color.NRGBA
	glyph  glyph
	r      float64 // half size in px
	// stem: Cook's stems take the verdict's colour (else a neutral grey).
	stem bool
}

// verdictLooks are in legend order.
var verdictLooks = []verdictLook{
	{view.VerdictOrdinary, rgb(0x8b, 0x95, 0x9d), glyphDot, 3.3, false},
	{view.VerdictNotable, rgb(0xb7, 0x86, 0x2c), glyphRing, 4.2, false},
	{view.VerdictOutlier, rgb(0x3d, 0x5a, 0x98), glyphTriangle, 5.5, false},
	{view.VerdictInfluential, rgb(0x8c, 0x4a, 0x8f), glyphDiamond, 5.5, true},
	{view.VerdictSuspect, rgb(0xb3, 0x3b, 0x2a), glyphSquare, 4.5, true},
}

func lookOf(verdict string) verdictLook {
	for _, l := range verdictLooks {
		if l.word == verdict {
			return l
		}
	}
	l := verdictLooks[0]
	l.word, l.colour = "none", alpha(l.colour, 0x80)
	return l
}

// Type sizes in px.
const (
	sizeTick   = 10.5
	sizeAxis   = 12
	sizeLegend = 11
	sizeLabel  = 10
	sizeTitle  = 13
)

// fonts measures text with the face the PNG draws with (Liberation Sans,
// which gonum/plot ships), so both outputs lay out alike.
var fonts = font.NewCache(liberation.Collection())

func face(size float64) font.Face {
	return fonts.Lookup(font.Font{Typeface: "Liberation", Variant: "Sans"}, vg.Length(size))
}

func textWidth(s string, size float64) float64 {
	f := face(size)
	return float64(f.Width(s))
}

// fontFamily is the SVG's font list, Liberation Sans first.
const fontFamily = `"Liberation Sans", Arimo, Arial, Helvetica, sans-serif`
