package web

import (
	"context"
	"fmt"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"plumb/cmd/plumb/internal/browsertest"
	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

// browser starts chromium for the dashboard tests; console and log
// warnings count as problems too.
func browser(t *testing.T) (context.Context, func() []string) {
	t.Helper()
	return browsertest.Start(t, 1360, 1000, true)
}

// count returns how many elements match the CSS selector.
func count(t *testing.T, ctx context.Context, sel string) int {
	t.Helper()
	n, err := chromedp.Run(ctx, chromedp.Evaluate[int](fmt.Sprintf(`document.querySelectorAll(%q).length`, sel)))
	if err != nil {
		t.Fatalf("count %s: %v", sel, err)
	}
	return n
}

func do(t *testing.T, ctx context.Context, what string, steps ...chromedp.Action[chromedp.Void]) {
	t.Helper()
	if err := chromedp.Do(ctx, steps...); err != nil {
		t.Fatalf("%s: %v", what, err)
	}
}

func text(t *testing.T, ctx context.Context, sel string) string {
	t.Helper()
	s, err := chromedp.Run(ctx, chromedp.Text(chromedp.CSS(sel)))
	if err != nil {
		t.Fatalf("text of %s: %v", sel, err)
	}
	return s
}

// poll waits (up to 10 s) until the JavaScript expression is true.
func poll(js string) chromedp.Action[chromedp.Void] {
	p := chromedp.Poll[bool](js, chromedp.WithPollingTimeout(10*time.Second))
	return func(ctx context.Context, t *chromedp.Target) (chromedp.Void, error) {
		_, err := p(ctx, t)
		return chromedp.Void{}, err
	}
}

func screenshot(t *testing.T, ctx context.Context, name string) {
	t.Helper()
	buf, err := chromedp.Run(ctx, chromedp.FullScreenshot(100))
	if err != nil {
		t.Fatalf("screenshot %s: %v", name, err)
	}
	p := filepath.Join(browsertest.ArtifactDir(t), name)
	if err := os.WriteFile(p, buf, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("screenshot: %s", p)
}

// TestBrowserDashboard loads the overview, a model page and the alert list
// in a real chromium, counts the drawn SVG elements, acknowledges an alert
// through the page and checks the source saw it.
func TestBrowserDashboard(t *testing.T) {
	ctx, problems := browser(t)
	src := viewtest.Demo()
	srv := httptest.NewServer(New(src, Options{Refresh: 500 * time.Millisecond}))
	defer srv.Close()
	d, _ := src.Model(context.Background(), "bench-b")
	n := len(d.Points)
	fits, _ := src.Fits(context.Background(), "bench-b", 0, 0)

	// Overview: one card per model, the caution line.
	do(t, ctx, "overview", chromedp.Navigate(srv.URL+"/"), chromedp.WaitVisible(chromedp.CSS(`.model-card`)))
	if c := count(t, ctx, `.model-card`); c != 3 {
		t.Errorf("overview shows %d model cards, want 3", c)
	}
	if c := text(t, ctx, `footer[data-caution]`); !strings.Contains(c, "never deletes or alters a measurement") {
		t.Errorf("caution line missing: %q", c)
	}
	screenshot(t, ctx, "dashboard-overview.png")

	// Model page: every chart draws its points and cutoff lines.
	do(t, ctx, "model page", chromedp.Navigate(srv.URL+"/models/bench-b"), chromedp.WaitVisible(chromedp.CSS(`svg[data-chart=cooks]`)))
	tests := []struct {
		name, sel string
		want      int
	}{
		{"fit points", `svg[data-chart=fit] .points .pt`, n},
		{"fit curve", `svg[data-chart=fit] polyline.curve`, 1},
		{"fit band", `svg[data-chart=fit] polygon.band`, 1},
		{"suggestions on the axis", `svg[data-chart=fit] .suggest`, len(d.Suggestions)},
		{"suspect marked", `svg[data-chart=fit] .pt.v-suspect`, d.Suspects},
		{"influence points", `svg[data-chart=influence] .pt`, n},
		{"leverage cutoff", `svg[data-chart=influence] .cutoff[data-cutoff=leverage]`, 1},
		{"t cutoffs", `svg[data-chart=influence] .cutoff[data-cutoff^=t-]`, 2},
		{"cooks points", `svg[data-chart=cooks] .pt`, n},
		{"cooks stems", `svg[data-chart=cooks] .stem`, n},
		{"cooks cutoffs", `svg[data-chart=cooks] .cutoff`, 2},
		{"history charts", `svg[data-chart=history]`, len(d.Terms)},
		{"history points", `svg[data-chart=history] .pt.hist`, len(d.Terms) * len(fits)},
		{"drift bands", `svg[data-chart=history] rect.drift-band`, len(d.Drift)},
		{"drift baselines", `svg[data-chart=history] .cutoff[data-cutoff=drift-baseline]`, len(d.Drift)},
		{"notable rows table", `table.points tbody tr`, n - countVerdict(d, view.VerdictOrdinary)},
	}
	for _, tt := range tests {
		if got := count(t, ctx, tt.sel); got != tt.want {
			t.Errorf("%s: %d elements (%s), want %d", tt.name, got, tt.sel, tt.want)
		}
	}
	if f := text(t, ctx, `[data-fragility]`); f != "1" {
		t.Errorf("fragility shows %q, want 1", f)
	}
	// Points lie inside their plot area (the scales are right).
	outside, err := chromedp.Run(ctx, chromedp.Evaluate[int](`(() => {
		let bad = 0;
		for (const svg of document.querySelectorAll('svg.chart')) {
			const area = svg.querySelector('.plotarea').getBoundingClientRect();
			for (const p of svg.querySelectorAll('.pt')) {
				const r = p.getBoundingClientRect();
				const cx = r.x + r.width/2, cy = r.y + r.height/2;
				if (cx < area.left-1 || cx > area.right+1 || cy < area.top-1 || cy > area.bottom+1) bad++;
			}
		}
		return bad; })()`))
	if err != nil {
		t.Fatal(err)
	}
	if outside != 0 {
		t.Errorf("%d points drawn outside their plot area", outside)
	}
	screenshot(t, ctx, "dashboard-model.png")

	// Acknowledge through the page.
	const id = "sp-3c1d9a70b2e45f18"
	row := fmt.Sprintf(`tr[data-alert=%q]`, id)
	do(t, ctx, "acknowledge through the page",
		chromedp.Navigate(srv.URL+"/alerts?state=open"),
		chromedp.WaitVisible(chromedp.CSS(row)),
		chromedp.SendKeys(chromedp.CSS(`#who`), "bench tech"),
		chromedp.SendKeys(chromedp.CSS(row+` input[name=note]`), "re-measuring tomorrow"),
		chromedp.Click(chromedp.CSS(row+` button[data-act=ack]`)),
		poll(`document.getElementById('status').textContent.includes('acknowledged')`),
	)
	a, err := src.Alert(context.Background(), id)
	if err != nil {
		t.Fatal(err)
	}
	if a.State != view.AlertAcknowledged || a.Note != "re-measuring tomorrow" || a.By != "bench tech" {
		t.Errorf("after the click the alert is %q (note %q, by %q); want acknowledged with the note", a.State, a.Note, a.By)
	}
	// The page refreshed itself: the row left the open list.
	do(t, ctx, "open list refresh", poll(fmt.Sprintf(`document.querySelectorAll(%q).length === 0`, row)))
	screenshot(t, ctx, "dashboard-alerts.png")

	// Live refresh: a change in the source shows up without a reload.
	src.PutAlert(view.AlertView{ID: "sp-0000000000000001", Model: "bench-b", Kind: "suspect_point", Severity: "warning",
		Subject: "run-0314.csv:30", State: view.AlertOpen, FirstSeen: time.Now(), LastSeen: time.Now(), Summary: "a new suspect row"})
	do(t, ctx, "live refresh", poll(`document.querySelectorAll('tr[data-alert="sp-0000000000000001"]').length === 1`))

	// With a token configured: the first try is refused, the page asks
	// for the token, the second try with it goes through, and the token
	// is kept for the session (sessionStorage) across a reload.
	tsrc := viewtest.Demo()
	tsrv := httptest.NewServer(New(tsrc, Options{Token: "bench-token-7", Refresh: time.Hour}))
	defer tsrv.Close()
	const fid = "ff-9e02b4c6d1a8f357"
	frow := fmt.Sprintf(`tr[data-alert=%q]`, fid)
	do(t, ctx, "ack without token",
		chromedp.Navigate(tsrv.URL+"/alerts"),
		chromedp.WaitVisible(chromedp.CSS(frow)),
		chromedp.Click(chromedp.CSS(frow+` button[data-act=ack]`)),
		poll(`document.getElementById('status').textContent.includes('refused')`),
	)
	if a, _ := tsrc.Alert(context.Background(), fid); a.State != view.AlertOpen {
		t.Fatalf("alert %s acknowledged without the token", fid)
	}
	do(t, ctx, "ack with token",
		chromedp.SendKeys(chromedp.CSS(`#token`), "bench-token-7"),
		chromedp.Evaluate[chromedp.Void](`document.getElementById('token').dispatchEvent(new Event('change'))`),
		chromedp.Click(chromedp.CSS(frow+` button[data-act=ack]`)),
		poll(`document.getElementById('status').textContent.includes('acknowledged')`),
		chromedp.Reload(),
		chromedp.WaitVisible(chromedp.CSS(`#token`)),
	)
	if a, _ := tsrc.Alert(context.Background(), fid); a.State != view.AlertAcknowledged {
		t.Errorf("alert %s is %q after the ack with the token", fid, a.State)
	}
	kept, err := chromedp.Run(ctx, chromedp.Evaluate[string](`document.getElementById('token').value`))
	if err != nil || kept != "bench-token-7" {
		t.Errorf("token after reload: %q (%v), want it kept for the session", kept, err)
	}
	// The refused first try is logged by the browser as a failed
	// resource load (401); that one is expected.
	for _, p := range problems() {
		if strings.Contains(p, "status of 401") {
			continue
		}
		t.Errorf("browser reported: %s", p)
	}
}

func countVerdict(d view.ModelDetail, v string) int {
	n := 0
	for _, p := range d.Points {
		if p.Verdict == v {
			n++
		}
	}
	return n
}
