package chart

import (
	"bytes"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

func demo(t testing.TB) (view.ModelDetail, []view.FitView) {
	t.Helper()
	src := viewtest.Demo()
	d, err := src.Model(t.Context(), "bench-b")
	if err != nil {
		t.Fatal(err)
	}
	fits, err := src.Fits(t.Context(), "bench-b", 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	return d, fits
}

func demoSpecs(t testing.TB) []Spec {
	d, fits := demo(t)
	specs := []Spec{Fit(d, d.Predictors[0]), Influence(d), Cooks(d)}
	for _, term := range d.Terms {
		var band *view.DriftBand
		for i := range d.Drift {
			if d.Drift[i].Term == term {
				band = &d.Drift[i]
			}
		}
		s, ok := History(fits, term, band)
		if !ok {
			t.Fatalf("no history for %s", term)
		}
		specs = append(specs, s)
	}
	return specs
}

// recorder is a canvas that keeps what is drawn.
type recorder struct{ shapes []shape }

func (r *recorder) group(string)  {}
func (r *recorder) endGroup()     {}
func (r *recorder) shape(s shape) { r.shapes = append(r.shapes, s) }
func (r *recorder) text(text)     {}
func (r *recorder) count(prefix string) int {
	n := 0
	for _, s := range r.shapes {
		if strings.HasPrefix(s.attrs, prefix) {
			n++
		}
	}
	return n
}

// TestSpecsDrawEveryPoint: each demo chart draws one mark per point of the
// fit (or per fit of the history), every flagged point in its verdict's
// class, and the same marks in SVG as the canvas receives (the PNG draws
// what the canvas receives).
func TestSpecsDrawEveryPoint(t *testing.T) {
	d, fits := demo(t)
	suspects := 0
	for _, p := range d.Points {
		if p.Verdict == view.VerdictSuspect {
			suspects++
		}
	}
	for _, s := range demoSpecs(t) {
		t.Run(s.Name, func(t *testing.T) {
			var r recorder
			place(s).draw(&r)
			want := len(d.Points)
			if s.Name == NameHistory {
				want = len(fits)
			}
			if got := r.count(`class="pt `); got != want {
				t.Errorf("%d marks drawn, want %d", got, want)
			}
			svg := string(s.HTML())
			if got := strings.Count(svg, `class="pt `); got != want {
				t.Errorf("SVG has %d marks, want %d", got, want)
			}
			if s.Name != NameHistory {
				if got := strings.Count(svg, `class="pt v-suspect"`); got != suspects {
					t.Errorf("SVG has %d suspect marks, want %d", got, suspects)
				}
			}
			if strings.Contains(svg, "NaN") || strings.Contains(svg, "Inf") || strings.Contains(svg, "url(") {
				t.Error("SVG holds NaN, Inf or an outside reference")
			}
		})
	}
}

// TestMarksInsideArea: every mark lies within the plot area.
func TestMarksInsideArea(t *testing.T) {
	for _, s := range demoSpecs(t) {
		l := place(s)
		var r recorder
		l.draw(&r)
		for _, sh := range r.shapes {
			if !strings.HasPrefix(sh.attrs, `class="pt `) {
				continue
			}
			p := sh.subs[0][0]
			if p.x < l.ml || p.x > l.right() || p.y < l.mt || p.y > l.bottom() {
				t.Errorf("%s: mark %s at (%.1f, %.1f) outside the plot area", s.Name, sh.attrs, p.x, p.y)
			}
		}
	}
}

// TestPNG decodes each chart's PNG, two pixels per CSS pixel, and saves
// them to $PLUMB_ARTIFACTS when set.
func TestPNG(t *testing.T) {
	dir := os.Getenv("PLUMB_ARTIFACTS")
	for i, s := range demoSpecs(t) {
		var buf bytes.Buffer
		if err := s.WritePNG(&buf); err != nil {
			t.Fatal(err)
		}
		img, err := png.Decode(bytes.NewReader(buf.Bytes()))
		if err != nil {
			t.Fatal(err)
		}
		if b := img.Bounds(); b.Dx() != int(2*s.Width) || b.Dy() != int(2*s.Height) {
			t.Errorf("%s: %v, want %gx%g", s.Name, b, 2*s.Width, 2*s.Height)
		}
		if dir != "" {
			name := filepath.Join(dir, "chart-"+s.Name+"-"+string(rune('0'+i))+".png")
			if err := os.WriteFile(name, buf.Bytes(), 0o644); err != nil {
				t.Fatal(err)
			}
		}
	}
}

// TestLayers: the layers later charts need (a prediction band, hollow and
// highlighted marks, an event rule, axis units) draw as their docs say.
func TestLayers(t *testing.T) {
	s := Spec{
		Name: "deviation", Width: 400, Height: 300,
		X: Axis{Label: "flow", Unit: "l/min"},
		Y: Axis{Label: "residual"},
		Layers: []Layer{
			Band{Class: "pred-band", Legend: "95 % prediction band", X: []float64{0, 10}, Lo: []float64{-2, -2}, Hi: []float64{2, 2}, Tone: TonePrediction},
			Rule{Class: "event", Vertical: true, At: 5, Label: "recalibrated", Tone: ToneEvent},
			Rule{ID: "below-range", At: -100, Label: "not drawn"},
			Points{Marks: []Mark{
				{X: 1, Y: 0.5, Row: 0, Verdict: "ordinary", Hollow: true},
				{X: 3, Y: 3, Row: 1, Verdict: "suspect", Highlight: true},
				{X: math.NaN(), Y: 1, Row: 2},
			}},
		},
	}
	svg := string(s.HTML())
	for _, want := range []string{
		`<polygon class="pred-band"`, `class="event"`, `>recalibrated<`, `>flow (l/min)<`,
		`class="pt v-ordinary hollow" data-row="0"`, `class="highlight"`, `class="pt v-suspect" data-row="1"`,
		`>95 % prediction band<`,
	} {
		if !strings.Contains(svg, want) {
			t.Errorf("SVG lacks %s", want)
		}
	}
	if strings.Contains(svg, "not drawn") || strings.Contains(svg, `data-row="2"`) {
		t.Error("a rule outside the range or an undefined point was drawn")
	}
	if err := s.WritePNG(new(bytes.Buffer)); err != nil {
		t.Fatal(err)
	}
}

// TestUndefinedCutoffs: NaN cutoffs and an empty model give charts
// without NaN coordinates.
func TestUndefinedCutoffs(t *testing.T) {
	d := view.ModelDetail{Points: []view.Point{{Row: 0, Y: 1, Leverage: 1, StudentizedExternal: view.NaN(), Cook: view.NaN()}}}
	d.Cutoffs = view.Cutoffs{Leverage: view.NaN(), TCritical: view.NaN(), CookAbsolute: view.NaN(), CookSizeAdjusted: view.NaN()}
	for _, s := range []Spec{Fit(d, "x"), Influence(d), Cooks(d)} {
		if svg := string(s.HTML()); strings.Contains(svg, "NaN") || strings.Contains(svg, "Inf") {
			t.Errorf("%s: undefined values reached the SVG", s.Name)
		}
		if err := s.WritePNG(new(bytes.Buffer)); err != nil {
			t.Errorf("%s: %v", s.Name, err)
		}
	}
}

// TestPointTitleLabel: a point's hover text names its row by the model's
// id column when it has one.
func TestPointTitleLabel(t *testing.T) {
	p := view.Point{File: "run.csv", Line: 18, Label: "SN-0417", Verdict: "suspect", Y: 1, Fitted: 1, Leverage: 0.5}
	if got := pointTitle(p); !strings.HasPrefix(got, "run.csv:18 SN-0417  suspect\n") {
		t.Errorf("title %q", got)
	}
	p.Label = ""
	if got := pointTitle(p); !strings.HasPrefix(got, "run.csv:18  suspect\n") {
		t.Errorf("title without a label %q", got)
	}
}
