package chart

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"plumb/cmd/plumb/internal/view"
)

// MaxDrawn is the most points a chart draws; beyond it ordinary points are
// thinned evenly (view.ThinPoints; flagged points are always drawn). The
// dashboard and the report draw the same points.
const MaxDrawn = 3000

// Chart names (data-chart).
const (
	NameFit       = "fit"
	NameInfluence = "influence"
	NameCooks     = "cooks"
	NameHistory   = "history"
	NameDeviation = "deviation"
)

// Sizes in CSS pixels.
const (
	wideW, wideH = 960, 400
	diagW, diagH = 640, 360
	histW, histH = 440, 260
)

// Fit is the response against one predictor: the fitted curve with its
// confidence band and the prediction band of one new reading, the points by verdict, and the suggested collection
// points as marks on the predictor axis.
func Fit(d view.ModelDetail, predictor string) Spec {
	s := Spec{
		Name: NameFit, Width: wideW, Height: wideH,
		Label: "Data and fitted curve with its confidence and prediction bands and the suggested collection points",
		X:     Axis{Label: predictor, Unit: d.Units[predictor]},
		Y:     Axis{Label: d.Response, Unit: d.Units[d.Response]},
	}
	if c, ok := d.Curve(predictor); ok {
		x := floats(c.X)
		if len(c.PredLower) == len(c.X) {
			s.Layers = append(s.Layers,
				Band{Class: "pred-band", Legend: "95 % prediction band (one new reading)", X: x, Lo: floats(c.PredLower), Hi: floats(c.PredUpper), Tone: TonePrediction})
		}
		s.Layers = append(s.Layers,
			Band{Class: "band", Legend: "95 % confidence band", X: x, Lo: floats(c.Lower), Hi: floats(c.Upper), Tone: ToneFit},
			Line{Class: "curve", Legend: "fitted", X: x, Y: floats(c.Y), Tone: ToneFit})
	}
	var marks AxisMarks
	marks.Class, marks.Legend = "suggest", "collect here"
	for _, sg := range d.Suggestions {
		if v, ok := sg.At[predictor]; ok && v.Finite() {
			marks.At = append(marks.At, float64(v))
			marks.Titles = append(marks.Titles, sg.Text)
		}
	}
	if len(marks.At) == 0 {
		marks.Legend = ""
	}
	s.Layers = append(s.Layers, marks, verdictPoints(d.Points, false, func(p view.Point) (float64, float64) {
		return float64(p.X[predictor]), float64(p.Y)
	}))
	return s
}

// Influence is the externally studentized residual against leverage with
// the 2p/n line and the ±Bonferroni critical |t| lines.
func Influence(d view.ModelDetail) Spec {
	tc := float64(d.Cutoffs.TCritical)
	return Spec{
		Name: NameInfluence, Width: diagW, Height: diagH,
		Label: "Studentized residual against leverage with the 2p/n and Bonferroni cutoff lines",
		X:     Axis{Label: "leverage h", Include: []float64{0, float64(d.Cutoffs.Leverage)}},
		Y:     Axis{Label: "studentized residual t", Include: []float64{tc, -tc}},
		Layers: []Layer{
			Rule{Class: "zero", At: 0, Tone: ToneReference},
			Rule{ID: "leverage", Vertical: true, At: float64(d.Cutoffs.Leverage), Label: "2p/n = " + Num(d.Cutoffs.Leverage), Tone: ToneCutoff, Dash: Dashed},
			Rule{ID: "t-upper", At: tc, Label: "+" + Num(d.Cutoffs.TCritical) + " Bonferroni", Tone: ToneCutoff, Dash: Dotted},
			Rule{ID: "t-lower", At: -tc, Label: "−" + Num(d.Cutoffs.TCritical), Tone: ToneCutoff, Dash: Dotted},
			verdictPoints(d.Points, false, func(p view.Point) (float64, float64) {
				return float64(p.Leverage), float64(p.StudentizedExternal)
			}),
		},
	}
}

// Cooks is Cook's distance by row of the fit with its two cutoff lines;
// up to 400 rows each point stands on a stem.
func Cooks(d view.ModelDetail) Spec {
	n := len(d.Points)
	ys := []float64{0, float64(d.Cutoffs.CookSizeAdjusted)}
	top := 0.0
	for _, p := range d.Points {
		if p.Cook.Finite() {
			top = math.Max(top, float64(p.Cook))
		}
	}
	// The absolute line is worth the room only when it is near the data.
	if a := float64(d.Cutoffs.CookAbsolute); finite(a) && a < 3*top {
		ys = append(ys, a)
	}
	pts := verdictPoints(d.Points, n <= 400, func(p view.Point) (float64, float64) {
		return float64(p.Row + 1), float64(p.Cook)
	})
	return Spec{
		Name: NameCooks, Width: diagW, Height: diagH,
		Label: "Cook's distance by observation with its cutoff lines",
		X:     Axis{Label: "observation (row of the fit)", Integer: true, Min: At(0.5 - 0.02*float64(n)), Include: []float64{float64(max(n, 1) + 1)}},
		Y:     Axis{Label: "Cook's distance", Min: At(0), Include: ys},
		Layers: []Layer{
			Rule{ID: "cook-size", At: float64(d.Cutoffs.CookSizeAdjusted), Label: "4/n = " + Num(d.Cutoffs.CookSizeAdjusted), Tone: ToneCutoff, Dash: Dashed},
			Rule{ID: "cook-absolute", At: float64(d.Cutoffs.CookAbsolute), Label: "absolute " + Num(d.Cutoffs.CookAbsolute), Tone: ToneCutoff, Dash: Dotted},
			pts,
		},
	}
}

// History is one coefficient across the fit history: the estimate with
// ±1.96 SE and, when band is not nil, the drift band around the baseline.
// ok is false when no fit has the term.
func History(fits []view.FitView, term string, band *view.DriftBand) (s Spec, ok bool) {
	var xs, ys, lo, hi []float64
	series := Points{Class: "series", Series: true}
	for i, f := range fits {
		e, has := f.Estimate(term)
		if !has || !e.Finite() {
			continue
		}
		se := math.NaN()
		for k, t := range f.Terms {
			if t == term && k < len(f.StdErrors) {
				se = float64(f.StdErrors[k])
			}
		}
		x := float64(i + 1)
		xs, ys = append(xs, x), append(ys, float64(e))
		lo, hi = append(lo, float64(e)-1.96*se), append(hi, float64(e)+1.96*se)
		series.Marks = append(series.Marks, Mark{X: x, Y: float64(e), Row: i, Title: fmt.Sprintf("fit %d: %s = %s", i+1, term, Num(e))})
	}
	if len(xs) == 0 {
		return Spec{}, false
	}
	s = Spec{
		Name: NameHistory, Width: histW, Height: histH,
		Label: "Coefficient history with its drift band",
		Meta:  [][2]string{{"term", term}},
		X:     Axis{Label: "fit (oldest → newest)", Integer: true, Include: []float64{1}},
		Y:     Axis{Label: term},
	}
	// Keep the first fits' wide errors from flattening the series: the
	// range covers the estimates (and the band) widened three times.
	yr := append([]float64{}, ys...)
	if band != nil {
		yr = append(yr, float64(band.Lower), float64(band.Upper), float64(band.Baseline))
	}
	y0, y1 := axisRange(Axis{}, ys)
	w := y1 - y0
	for _, v := range append(append(yr, lo...), hi...) {
		if v >= y0-3*w && v <= y1+3*w {
			s.Y.Include = append(s.Y.Include, v)
		}
	}
	if band != nil && band.Lower.Finite() && band.Upper.Finite() {
		s.Layers = append(s.Layers,
			Span{Class: "drift-band", Legend: "drift band", Lo: float64(band.Lower), Hi: float64(band.Upper), Tone: ToneDrift},
			Rule{ID: "drift-upper", At: float64(band.Upper), Tone: ToneDrift, Dash: Dashed},
			Rule{ID: "drift-lower", At: float64(band.Lower), Tone: ToneDrift, Dash: Dashed},
			Rule{ID: "drift-baseline", At: float64(band.Baseline), Legend: "baseline", Label: "baseline", Tone: ToneFit})
	}
	s.Layers = append(s.Layers,
		Band{Class: "se-band", Legend: "±1.96 SE", X: xs, Lo: lo, Hi: hi, Tone: ToneSpread},
		Line{Class: "estimate", Legend: "estimate", X: xs, Y: ys, Tone: ToneInk},
		series)
	return s, true
}

// verdictPoints are the drawn points (thinned to MaxDrawn) by verdict.
func verdictPoints(pts []view.Point, stems bool, xy func(view.Point) (float64, float64)) Points {
	drawn, _ := view.ThinPoints(pts, MaxDrawn)
	out := Points{Class: "points", Stems: stems, Legend: true, Marks: make([]Mark, 0, len(drawn))}
	for _, p := range drawn {
		x, y := xy(p)
		out.Marks = append(out.Marks, Mark{X: x, Y: y, Row: p.Row, Verdict: p.Verdict, Title: pointTitle(p)})
	}
	return out
}

func floats(v []view.Float) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = float64(x)
	}
	return out
}

func pointTitle(p view.Point) string {
	verdict := p.Verdict
	if verdict == "" {
		verdict = "none"
	}
	where := fmt.Sprintf("%s:%d", p.File, p.Line)
	if p.Label != "" {
		where += " " + p.Label // the row's id column
	}
	return fmt.Sprintf("%s  %s\ny = %s, fitted %s\nleverage %s, t = %s, Cook's D = %s",
		where, verdict, Num(p.Y), Num(p.Fitted), Num(p.Leverage), Num(p.StudentizedExternal), Num(p.Cook))
}

// Settings lists values by name, sorted: "a = 1, b = 2.5" (the values
// at which a curve holds the other predictors, a suggestion's point).
func Settings(m map[string]view.Float) string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = k + " = " + Num(m[k])
	}
	return strings.Join(parts, ", ")
}

// Num formats a value for a label: 4 significant digits, "—" when
// undefined.
func Num(v view.Float) string {
	if !v.Finite() {
		return "—"
	}
	f := float64(v)
	if f != 0 && (math.Abs(f) >= 1e6 || math.Abs(f) < 1e-3) {
		return strconv.FormatFloat(f, 'e', 3, 64)
	}
	return strconv.FormatFloat(f, 'g', 4, 64)
}
