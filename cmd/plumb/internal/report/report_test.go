package report

import (
	"bytes"
	"errors"
	"image/png"
	"io"
	"math"
	"regexp"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

type demo struct {
	d      view.ModelDetail
	fits   []view.FitView
	alerts []view.AlertView
}

func loadDemo(t testing.TB) demo {
	t.Helper()
	src := viewtest.Demo()
	d, err := src.Model(t.Context(), "bench-b")
	if err != nil {
		t.Fatal(err)
	}
	fits, _ := src.Fits(t.Context(), "bench-b", 0, 0)
	al, _ := src.Alerts(t.Context(), view.AlertFilter{Model: "bench-b"})
	return demo{d, fits, al}
}

// writeDemo renders the demo model's report as the report command does:
// Collect from the source, then Render.
func writeDemo(t testing.TB) string {
	t.Helper()
	opts := Options{Generated: time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC)}
	c, err := Collect(t.Context(), viewtest.Demo(), "bench-b", opts)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := Render(&buf, c, opts); err != nil {
		t.Fatal(err)
	}
	return buf.String()
}

func TestWriteContents(t *testing.T) {
	html := writeDemo(t)
	for _, want := range []string{
		"plumb report: bench-b",
		"never deletes or alters a measurement", // the caution
		`data-chart="fit"`, `data-chart="influence"`, `data-chart="cooks"`, `data-chart="history"`,
		"run-0314.csv:18", // the suspect row with its provenance
		`class="verdict v-suspect"`,
		"Removing <b class=\"hot\">1</b> row", // fragility, at the limit: highlighted
		"ref_kpa = 150",                       // a suggestion
		"sp-3c1d9a70b2e45f18",                 // alert history
		"dr-07aa4be19c2f6d35",                 // a resolved alert is in the history too
		"Generated 2026-03-14 10:00:00Z",
		// The demo's two quarantined rows, newest first, with position,
		// reason and text as read.
		`<tr data-quarantine="2"><td class="m where">run-0314.csv:23:1, column &#34;output_mv&#34; (field 1)</td><td>column 1 &#34;output_mv&#34;: empty field</td><td class="m raw">,105</td>`,
		`<tr data-quarantine="1"><td class="m where">run-0314.csv:9:6, column &#34;ref_kpa&#34; (field 2)</td>`,
	} {
		if !strings.Contains(html, want) {
			t.Errorf("report lacks %q", want)
		}
	}
	if n := strings.Count(html, `data-chart="history"`); n != 2 {
		t.Errorf("%d history charts, want one per term (2)", n)
	}
}

// The report must open anywhere: no external resource of any kind.
func TestWriteSelfContained(t *testing.T) {
	html := writeDemo(t)
	for _, re := range []*regexp.Regexp{
		regexp.MustCompile(`(?i)<link\b`),
		regexp.MustCompile(`(?i)<script\b`),
		regexp.MustCompile(`(?i)<img\b`),
		regexp.MustCompile(`(?i)url\(`),
		regexp.MustCompile(`(?i)(src|href)\s*=\s*"(https?:|//)`),
		regexp.MustCompile(`(?i)@import`),
	} {
		if m := re.FindString(html); m != "" {
			t.Errorf("report refers outside itself: %q", m)
		}
	}
	// The only URLs are XML namespace names, which are never fetched.
	for _, m := range regexp.MustCompile(`https?://[^"'\s<>]+`).FindAllString(html, -1) {
		if !strings.HasPrefix(m, "http://www.w3.org/") {
			t.Errorf("unexpected URL %q", m)
		}
	}
}

func TestWriteNoFit(t *testing.T) {
	src := viewtest.Demo()
	d, _ := src.Model(t.Context(), "flow-rig")
	var buf bytes.Buffer
	if err := Write(&buf, d, nil, nil, Options{}); err != nil {
		t.Fatal(err)
	}
	s := buf.String()
	if strings.Contains(s, "<svg") || !strings.Contains(s, "No fit yet") || !strings.Contains(s, "3 rows, the fit needs") {
		t.Errorf("report of a waiting model:\n%.1500s", s)
	}
}

func TestChart(t *testing.T) {
	dm := loadDemo(t)
	for _, name := range []string{ChartFit, ChartDeviation, ChartInfluence, ChartCooks} {
		t.Run(name+"/svg", func(t *testing.T) {
			var buf bytes.Buffer
			if err := Chart(&buf, dm.d, name, "svg"); err != nil {
				t.Fatal(err)
			}
			s := buf.String()
			// One glyph path per point at least, plus the cutoff lines.
			if !strings.Contains(s, "<svg") || strings.Count(s, "<path") < len(dm.d.Points)+2 {
				t.Errorf("svg has %d paths for %d points", strings.Count(s, "<path"), len(dm.d.Points))
			}
		})
		t.Run(name+"/png", func(t *testing.T) {
			var buf bytes.Buffer
			if err := Chart(&buf, dm.d, name, "png"); err != nil {
				t.Fatal(err)
			}
			img, err := png.Decode(&buf)
			if err != nil {
				t.Fatal(err)
			}
			if b := img.Bounds(); b.Dx() < 600 || b.Dy() < 300 {
				t.Errorf("png is %v", b)
			}
		})
	}
	var buf bytes.Buffer
	if err := HistoryChart(&buf, dm.d, dm.fits, "ref_kpa", "svg"); err != nil || !strings.Contains(buf.String(), "<svg") {
		t.Errorf("history chart: %v", err)
	}
	for _, tt := range []struct{ name, format string }{{"pie", "svg"}, {"cooks", "gif"}} {
		if err := Chart(&buf, dm.d, tt.name, tt.format); !errors.Is(err, ErrUnknownChart) {
			t.Errorf("Chart(%q, %q) = %v, want ErrUnknownChart", tt.name, tt.format, err)
		}
	}
	if err := HistoryChart(&buf, dm.d, dm.fits, "nope", "svg"); err == nil {
		t.Error("history of an unknown term: no error")
	}
}

// Undefined diagnostics (NaN, ±Inf) are left out of the charts, never a
// failure and never a NaN coordinate.
func TestWriteUndefinedValues(t *testing.T) {
	nan, inf := view.NaN(), view.Float(math.Inf(1))
	d := view.ModelDetail{
		ModelSummary: view.ModelSummary{Name: "edge", State: view.StateJudging, Response: "y",
			Terms: []string{"intercept", "x"}, Predictors: []string{"x"}, MaxCook: nan},
		N: 3, P: 2, Sigma: nan, RSquared: 1,
		Cutoffs: view.Cutoffs{Leverage: nan, CookAbsolute: nan, CookSizeAdjusted: 4.0 / 3, TCritical: nan, Alpha: 0.05},
		Points: []view.Point{
			{Row: 0, X: map[string]view.Float{"x": 1}, Y: 2, Fitted: 2, Leverage: 1, StudentizedExternal: nan, Cook: nan, Verdict: view.VerdictOrdinary},
			{Row: 1, X: map[string]view.Float{"x": 2}, Y: 4, Fitted: 4, Leverage: 0.5, StudentizedExternal: inf, Cook: inf, Verdict: view.VerdictNotable},
			{Row: 2, X: map[string]view.Float{"x": 3}, Y: 5, Leverage: 0.5, StudentizedExternal: 0.3, Cook: 0.1, Verdict: view.VerdictOrdinary},
		},
		Curves:      []view.Curve{{Predictor: "x", X: []view.Float{1, 2, 3}, Y: []view.Float{2, nan, 5}, Lower: []view.Float{nan, 3, 4}, Upper: []view.Float{inf, 5, 6}}},
		Suggestions: []view.Suggestion{{At: map[string]view.Float{"x": nan}, Text: "n/a"}},
		Drift:       []view.DriftBand{{Term: "x", Baseline: nan, Lower: nan, Upper: nan}},
	}
	fits := []view.FitView{
		{Terms: []string{"intercept", "x"}, Estimates: []view.Float{nan, 1}, StdErrors: []view.Float{nan, inf}},
		{Terms: []string{"intercept", "x"}, Estimates: []view.Float{0, 2}, StdErrors: []view.Float{1, nan}},
	}
	var buf bytes.Buffer
	if err := Write(&buf, d, fits, nil, Options{}); err != nil {
		t.Fatal(err)
	}
	if m := regexp.MustCompile(`(?i)="[^"]*\b(nan|[+-]?inf)\b[^"]*"`).FindString(buf.String()); m != "" {
		t.Errorf("non-finite value in markup: %s", m)
	}
	for _, name := range []string{ChartFit, ChartDeviation, ChartInfluence, ChartCooks} {
		if err := Chart(io.Discard, d, name, "png"); err != nil {
			t.Errorf("%s: %v", name, err)
		}
	}
}
