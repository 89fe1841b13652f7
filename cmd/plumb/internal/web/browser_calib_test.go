package web

import (
	"context"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

// TestBrowserDeviation loads a model page in chromium and checks the
// deviation chart: it exists, draws every point at its residual, has the
// prediction band around zero, names the units on its axes and rings
// every flagged point; the data-and-fit chart has the prediction band
// beside the confidence band, and its axes carry the units too.
func TestBrowserDeviation(t *testing.T) {
	ctx, problems := browser(t)
	src := viewtest.Demo()
	d, err := src.Model(context.Background(), "bench-b")
	if err != nil {
		t.Fatal(err)
	}
	x := d.Predictors[0]
	d.Units = map[string]string{d.Response: "mV", x: "kPa"}
	d.Predictions = []view.Prediction{{At: map[string]view.Float{x: 75}, Fitted: 150.1, SEFit: 0.3,
		Confidence: view.Pair{149.5, 150.7}, Prediction: view.Pair{146.2, 154}, Level: 0.95, Readings: 1, DF: 18}}
	d.Inverse = []view.Inverse{{Reading: 150, Column: x, Estimate: 74.9, StandardUncertainty: 0.9,
		Interval: view.Pair{73.1, 76.7}, Status: "unique", Shape: "bounded", Level: 0.95, Readings: 1, DF: 18}}
	src.SetModel(d)
	srv := httptest.NewServer(New(src, Options{Refresh: time.Hour}))
	defer srv.Close()

	do(t, ctx, "model page", chromedp.Navigate(srv.URL+"/models/bench-b"), chromedp.WaitVisible(chromedp.CSS(`svg[data-chart=deviation]`)))
	n := len(d.Points)
	flagged := n - countVerdict(d, view.VerdictOrdinary)
	if flagged == 0 || d.Suspects == 0 {
		t.Fatalf("the demo model has %d flagged rows and %d suspects; the test needs some", flagged, d.Suspects)
	}
	tests := []struct {
		name, sel string
		want      int
	}{
		{"deviation chart", `svg[data-chart=deviation]`, 1},
		{"deviation band", `svg[data-chart=deviation] polygon.pred-band`, 1},
		{"deviation zero line", `svg[data-chart=deviation] .zero`, 1},
		{"deviation points", `svg[data-chart=deviation] .points .pt`, n},
		{"flagged points ringed", `svg[data-chart=deviation] .highlight`, flagged},
		{"suspects marked", `svg[data-chart=deviation] .pt.v-suspect`, d.Suspects},
		{"fit prediction band", `svg[data-chart=fit] polygon.pred-band`, 1},
		{"fit confidence band", `svg[data-chart=fit] polygon.band`, 1},
		{"predictions listed", `[data-answers] table[data-predictions] tbody tr`, 1},
		{"inverse listed", `[data-answers] table[data-inverse] tbody tr`, 1},
	}
	for _, tt := range tests {
		if got := count(t, ctx, tt.sel); got != tt.want {
			t.Errorf("%s: %d elements (%s), want %d", tt.name, got, tt.sel, tt.want)
		}
	}
	titles := func(chart string) string {
		s, err := chromedp.Run(ctx, chromedp.Evaluate[string](`Array.from(document.querySelectorAll('svg[data-chart=`+chart+`] .axis-title')).map(e => e.textContent).join(' | ')`))
		if err != nil {
			t.Fatal(err)
		}
		return s
	}
	if got, want := titles("deviation"), x+" (kPa) | reading − curve (mV)"; got != want {
		t.Errorf("deviation axes %q, want %q", got, want)
	}
	if got, want := titles("fit"), x+" (kPa) | "+d.Response+" (mV)"; got != want {
		t.Errorf("fit axes %q, want %q", got, want)
	}

	// Geometry: the band spans the zero line, each ring sits on a flagged
	// point, and each point's height above zero has the sign of its
	// residual.
	geom, err := chromedp.Run(ctx, chromedp.Evaluate[string](`(() => {
		const svg = document.querySelector('svg[data-chart=deviation]');
		const band = svg.querySelector('polygon.pred-band').getBoundingClientRect();
		const zero = svg.querySelector('.zero').getBoundingClientRect();
		const zy = zero.y + zero.height/2;
		if (!(band.top < zy && zy < band.bottom)) return 'band ' + band.top + '..' + band.bottom + ' does not span zero at ' + zy;
		const flagged = Array.from(svg.querySelectorAll('.pt')).filter(p => !p.classList.contains('v-ordinary'))
			.map(p => { const r = p.getBoundingClientRect(); return [r.x + r.width/2, r.y + r.height/2]; });
		for (const h of svg.querySelectorAll('.highlight')) {
			const r = h.getBoundingClientRect(), cx = r.x + r.width/2, cy = r.y + r.height/2;
			if (!flagged.some(([x, y]) => Math.abs(x-cx) < 1 && Math.abs(y-cy) < 1)) return 'ring at ' + cx + ',' + cy + ' is on no flagged point';
		}
		for (const p of svg.querySelectorAll('.pt')) {
			const m = p.querySelector('title').textContent.match(/reading − curve = (\S+)/);
			if (!m) return 'point without its deviation: ' + p.querySelector('title').textContent;
			const r = p.getBoundingClientRect(), y = r.y + r.height/2, v = parseFloat(m[1]);
			if (Math.abs(v) > 1e-9 && Math.abs(y - zy) > 2 && (v > 0) !== (y < zy)) return 'point ' + v + ' on the wrong side of zero';
		}
		return 'ok'; })()`))
	if err != nil {
		t.Fatal(err)
	}
	if geom != "ok" {
		t.Error(geom)
	}
	if c := text(t, ctx, `figure[data-figure=deviation] figcaption`); !strings.Contains(c, "minus the curve (mV)") {
		t.Errorf("deviation caption %q does not name the unit", c)
	}
	screenshot(t, ctx, "dashboard-deviation.png")
	for _, p := range problems() {
		t.Errorf("browser reported: %s", p)
	}
}
