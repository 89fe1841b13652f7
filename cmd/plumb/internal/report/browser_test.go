package report

import (
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
	// path per point (gonum/plot draws every glyph and line as a path).
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
