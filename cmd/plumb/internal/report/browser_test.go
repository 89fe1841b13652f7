package report

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/chromedp/chromedp"

	"plumb/cmd/plumb/internal/browsertest"
)

// TestBrowserReport opens a generated report file in headless Debian
// chromium (offline flags, fresh profile), checks that each chart renders
// with its plotted elements, that nothing is fetched and nothing is
// logged as an error, and saves a screenshot.
func TestBrowserReport(t *testing.T) {
	dir := browsertest.ArtifactDir(t)
	path := filepath.Join(dir, "report-bench-b.html")
	if err := os.WriteFile(path, []byte(writeDemo(t)), 0o644); err != nil {
		t.Fatal(err)
	}
	dm := loadDemo(t)

	ctx, problems := browsertest.Start(t, 1100, 900, false)
	if err := chromedp.Do(ctx, chromedp.Navigate("file://"+path), chromedp.WaitVisible(chromedp.CSS(`svg[data-chart=cooks]`))); err != nil {
		t.Fatal(err)
	}
	// Each chart is laid out with a real size and holds at least one drawn
	// path per point (package chart draws every glyph and line as a path).
	for _, name := range []string{"fit", "influence", "cooks"} {
		js := fmt.Sprintf(`(() => { const s = document.querySelector('svg[data-chart=%s]');
			const r = s.getBoundingClientRect();
			return [r.width > 300 && r.height > 150 ? 1 : 0, s.querySelectorAll('path').length, s.querySelectorAll('text').length]; })()`, name)
		got, err := chromedp.Run(ctx, chromedp.Evaluate[[]int](js))
		if err != nil {
			t.Fatal(err)
		}
		if got[0] != 1 {
			t.Errorf("%s: chart not laid out at a readable size", name)
		}
		if got[1] < len(dm.d.Points)+2 {
			t.Errorf("%s: %d paths drawn, want at least %d (points and cutoffs)", name, got[1], len(dm.d.Points)+2)
		}
		if got[2] < 5 {
			t.Errorf("%s: %d text elements, want axis labels and ticks", name, got[2])
		}
	}
	hist, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll('svg[data-chart=history]').length`))
	if err != nil {
		t.Fatal(err)
	}
	if hist != len(dm.d.Terms) {
		t.Errorf("%d history charts, want %d", hist, len(dm.d.Terms))
	}
	resources, err := chromedp.Run(ctx, chromedp.Evaluate[[]string](`performance.getEntriesByType('resource').map(e => e.name)`))
	if err != nil {
		t.Fatal(err)
	}
	if len(resources) != 0 {
		t.Errorf("the report fetched %v", resources)
	}
	quar, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll('table.quarantine tr[data-quarantine]').length`))
	if err != nil {
		t.Fatal(err)
	}
	if quar != 2 {
		t.Errorf("%d quarantined rows listed, want the demo's 2", quar)
	}
	caution, err := chromedp.Run(ctx, chromedp.Text(chromedp.CSS(`.caution`)))
	if err != nil || !strings.Contains(caution, "qualified staff") {
		t.Errorf("caution: %q, %v", caution, err)
	}
	buf, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatal(err)
	}
	shot := filepath.Join(dir, "report-bench-b.png")
	if err := os.WriteFile(shot, buf, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("report: %s, screenshot: %s", path, shot)
	for _, p := range problems() {
		t.Errorf("browser reported: %s", p)
	}
}

// TestBrowserQuarantine opens a report whose quarantined rows carry markup,
// characters that do not print and a 5,000-character line: the browser
// must build no element from the data, show the text as it stood, and
// keep the long line from widening the page.
func TestBrowserQuarantine(t *testing.T) {
	dir := browsertest.ArtifactDir(t)
	path := filepath.Join(dir, "report-quarantine.html")
	dm := loadDemo(t)
	d := dm.d
	d.Quarantined = 1234
	var buf bytes.Buffer
	if err := Render(&buf, Contents{Detail: d, Fits: dm.fits, Alerts: dm.alerts, Quarantine: hostile()}, Options{MaxQuarantine: 4}); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	ctx, problems := browsertest.Start(t, 1100, 900, false)
	if err := chromedp.Do(ctx, chromedp.Navigate("file://"+path), chromedp.WaitVisible(chromedp.CSS(`table.quarantine`))); err != nil {
		t.Fatal(err)
	}
	got, err := chromedp.Run(ctx, chromedp.Evaluate[map[string]any](`(() => ({
		scripts: document.querySelectorAll('script').length,
		imgs: document.querySelectorAll('img').length,
		rows: document.querySelectorAll('table.quarantine tr[data-quarantine]').length,
		oldest: !!document.querySelector('tr[data-quarantine="1"]'),
		raw: document.querySelector('tr[data-quarantine="5"] td.raw').textContent,
		more: document.querySelector('[data-quarantine-more]').textContent,
		overflow: document.documentElement.scrollWidth - document.documentElement.clientWidth,
		longHeight: document.querySelector('tr[data-quarantine="2"] td.raw').getBoundingClientRect().height,
	}))()`))
	if err != nil {
		t.Fatal(err)
	}
	if got["scripts"].(float64) != 0 || got["imgs"].(float64) != 0 {
		t.Errorf("data became elements: %v", got)
	}
	if got["rows"].(float64) != 4 || got["raw"] != "11,2" || got["oldest"] != false {
		t.Errorf("rows listed %v, newest raw %q, oldest listed %v; want the newest 4", got["rows"], got["raw"], got["oldest"])
	}
	if m, _ := got["more"].(string); !strings.Contains(m, "1230 older rows not listed") {
		t.Errorf("more line %q", m)
	}
	if got["overflow"].(float64) > 0 {
		t.Errorf("the page is %v px wider than the window", got["overflow"])
	}
	if h := got["longHeight"].(float64); h > 400 {
		t.Errorf("the cut long line is %v px tall", h)
	}
	text, err := chromedp.Run(ctx, chromedp.Text(chromedp.CSS(`tr[data-quarantine="3"] td.raw`)))
	if err != nil || text != `9,\x00\t12\u00a0500,\xff` {
		t.Errorf("row 3 shows %q, %v; want its characters marked", text, err)
	}
	shot, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "report-quarantine.png"), shot, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, p := range problems() {
		t.Errorf("browser reported: %s", p)
	}
}
