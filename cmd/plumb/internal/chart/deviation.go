package chart

import (
	"fmt"

	"plumb/cmd/plumb/internal/view"
)

// MaxDeviationDrawn is the most points the deviation chart draws: fewer
// than MaxDrawn, since it sits on the same page as three charts of
// MaxDrawn points. Flagged points are always drawn (view.ThinPoints).
const MaxDeviationDrawn = 2000

func unitSuffix(u string) string {
	if u == "" {
		return ""
	}
	return " " + u
}

// Deviation is the residual (reading minus curve) against one predictor:
// the 95 % prediction band of one new reading drawn around zero, so a
// reading off by a little on a curve spanning a wide range stands out;
// the points by verdict (thinned to MaxDeviationDrawn), each flagged
// point (any verdict but ordinary) ringed.
//
// The band is the prediction interval less the fitted value, ±t·s·√(1+h)
// along the curve (view.Curve PredLower, PredUpper): where a new
// reading's deviation is expected to fall. A fitted row's own residual
// has the smaller variance σ²(1 - h), so the band is a guide for the eye,
// not a test; the verdicts are the tests.
func Deviation(d view.ModelDetail, predictor string) Spec {
	unit := d.Units[d.Response]
	s := Spec{
		Name: NameDeviation, Width: wideW, Height: diagH,
		Label: "Deviation of each reading from the curve against " + predictor + ", with the prediction band around zero and the flagged points ringed",
		Meta:  [][2]string{{"predictor", predictor}},
		X:     Axis{Label: predictor, Unit: d.Units[predictor]},
		Y:     Axis{Label: "reading − curve", Unit: unit, Include: []float64{0}},
	}
	if c, ok := d.Curve(predictor); ok && len(c.PredLower) == len(c.X) {
		lo, hi := make([]float64, len(c.X)), make([]float64, len(c.X))
		for i := range c.X {
			lo[i] = float64(c.PredLower[i] - c.Y[i])
			hi[i] = float64(c.PredUpper[i] - c.Y[i])
		}
		s.Layers = append(s.Layers, Band{Class: "pred-band", Legend: "95 % prediction band (one new reading)", X: floats(c.X), Lo: lo, Hi: hi, Tone: TonePrediction})
	}
	drawn, _ := view.ThinPoints(d.Points, MaxDeviationDrawn)
	pts := Points{Class: "points", Legend: true, Marks: make([]Mark, 0, len(drawn))}
	for _, p := range drawn {
		v := p.Verdict
		if v == "" {
			v = "none"
		}
		pts.Marks = append(pts.Marks, Mark{X: float64(p.X[predictor]), Y: float64(p.Residual), Row: p.Row, Verdict: p.Verdict,
			Title:     fmt.Sprintf("%s:%d  %s\nreading − curve = %s%s", p.File, p.Line, v, Num(p.Residual), unitSuffix(unit)),
			Highlight: p.Verdict != "" && p.Verdict != view.VerdictOrdinary})
	}
	s.Layers = append(s.Layers, Rule{Class: "zero", At: 0, Tone: ToneReference}, pts)
	return s
}
