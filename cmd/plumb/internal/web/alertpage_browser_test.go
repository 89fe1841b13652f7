package web

import (
	"context"
	"fmt"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

// TestBrowserAlertPage goes from the overview to an alert's page in a
// real chromium, checks the id, the measures, the suggestion and the
// ringed reading, acknowledges the alert from its page and sees the
// acknowledgement in the page's history. It also reads the flags on the
// model page: each says its measure's direction and family, never a bare
// "value > cutoff".
func TestBrowserAlertPage(t *testing.T) {
	ctx, problems := browser(t)
	src := viewtest.Demo()
	srv := httptest.NewServer(New(src, Options{Refresh: 500 * time.Millisecond}))
	defer srv.Close()
	d, _ := src.Model(context.Background(), "bench-b")
	p := d.Points[16]
	const id = "sp-3c1d9a70b2e45f18"

	link := fmt.Sprintf(`tr[data-alert=%q] a.alert-link`, id)
	do(t, ctx, "overview to alert page",
		chromedp.Navigate(srv.URL+"/"),
		chromedp.WaitVisible(chromedp.CSS(link)),
		chromedp.Click(chromedp.CSS(link)),
		chromedp.WaitVisible(chromedp.CSS(`[data-alert-id]`)),
	)
	if got := text(t, ctx, `[data-alert-id]`); got != id {
		t.Errorf("id shown %q, want %q", got, id)
	}
	if got := count(t, ctx, `table[data-measures] tbody tr`); got != len(p.Flags) {
		t.Errorf("%d measures shown, want %d", got, len(p.Flags))
	}
	rows, err := chromedp.Run(ctx, chromedp.Evaluate[[]string](`Array.from(document.querySelectorAll('table[data-measures] tbody tr')).map(e => e.textContent)`))
	if err != nil {
		t.Fatal(err)
	}
	for i, fl := range p.Flags {
		if i < len(rows) && !strings.Contains(rows[i], fl.Text()) {
			t.Errorf("measure row %q lacks %q", rows[i], fl.Text())
		}
	}
	if got := text(t, ctx, `[data-suggestion]`); got != d.Suggestions[0].Text {
		t.Errorf("suggestion %q, want %q", got, d.Suggestions[0].Text)
	}
	if got := text(t, ctx, `[data-reading]`); !strings.Contains(got, "run-0314.csv:18") {
		t.Errorf("reading %q lacks its file:line", got)
	}
	for _, c := range []string{"fit", "influence", "cooks"} {
		if n := count(t, ctx, fmt.Sprintf(`svg[data-chart=%s] .highlight`, c)); n != 1 {
			t.Errorf("%s chart rings %d points, want the alert's reading", c, n)
		}
	}
	screenshot(t, ctx, "dashboard-alert.png")

	do(t, ctx, "acknowledge from the alert page",
		chromedp.SendKeys(chromedp.CSS(`#who`), "bench tech"),
		chromedp.SendKeys(chromedp.CSS(`form.alert-act input[name=note]`), "re-measuring tomorrow"),
		chromedp.Click(chromedp.CSS(`form.alert-act button[data-act=ack]`)),
		poll(`document.getElementById('status').textContent.includes('acknowledged')`),
		poll(`document.querySelectorAll('[data-history] li[data-event=acknowledged]').length === 1`),
	)
	if got := text(t, ctx, `[data-history] li[data-event=acknowledged]`); !strings.Contains(got, "by bench tech") || !strings.Contains(got, "re-measuring tomorrow") {
		t.Errorf("history entry %q, want who and the note", got)
	}
	if got := text(t, ctx, `[data-state]`); got != view.AlertAcknowledged {
		t.Errorf("state shown %q after the ack", got)
	}
	a, err := src.Alert(context.Background(), id)
	if err != nil {
		t.Fatal(err)
	}
	if a.State != view.AlertAcknowledged || a.By != "bench tech" || a.Note != "re-measuring tomorrow" {
		t.Errorf("source has the alert %q by %q note %q", a.State, a.By, a.Note)
	}

	// The model page's flags, as the engine words them.
	do(t, ctx, "model page", chromedp.Navigate(srv.URL+"/models/bench-b"), chromedp.WaitVisible(chromedp.CSS(`table.points`)))
	n := count(t, ctx, `td.flags span[data-flag]`)
	if n == 0 {
		t.Fatal("no flag shown on the model page")
	}
	flags, err := chromedp.Run(ctx, chromedp.Evaluate[[]string](`Array.from(document.querySelectorAll('td.flags span[data-flag]')).map(e => e.dataset.flag + '\t' + e.textContent)`))
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range flags {
		measure, words, _ := strings.Cut(f, "\t")
		if strings.Contains(words, ">") {
			t.Errorf("flag %q compares with '>'", words)
		}
		var ok bool
		switch measure {
		case "outlier_p_bonferroni":
			ok = strings.Contains(words, "below the")
		case "dffits":
			ok = strings.Contains(words, "|DFFITS|") && strings.Contains(words, "cutoff")
		case "dfbetas":
			ok = strings.Contains(words, "|DFBETAS| of ") || strings.Contains(words, "DFBETAS of ")
		case "covratio":
			ok = strings.Contains(words, "|COVRATIO − 1|")
		default:
			ok = strings.Contains(words, "above the ") && strings.Contains(words, " cutoff ")
		}
		if !ok {
			t.Errorf("flag %s reads %q", measure, words)
		}
	}
	for _, p := range problems() {
		t.Errorf("browser reported: %s", p)
	}
}
