//go:build integration

package main

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"plumb/cmd/plumb/internal/browsertest"
	"plumb/cmd/plumb/internal/view"
)

// TestDecisionsBrowser sets a suspect reading aside from the model page
// of the running daemon in a real chromium, as the reviewer, and sees it
// drawn hollow on the fit chart and listed with who set it aside and why;
// then sets a second one aside from its alert on the alert list.
func TestDecisionsBrowser(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	h, _, _ := startBench(t, ctx)
	h.wait("the suspect-point alert", func() bool { return len(h.alertsOf("suspect_point", "open")) == 1 })
	h.wait("the fit", func() bool { return h.model().N == 31 })

	bctx, problems := browsertest.Start(t, 1360, 1000, true)
	run := func(what string, as ...chromedp.Action[chromedp.Void]) {
		t.Helper()
		if err := chromedp.Do(bctx, as...); err != nil {
			t.Fatalf("%s: %v", what, err)
		}
	}
	until := func(js string) chromedp.Action[chromedp.Void] {
		p := chromedp.Poll[bool](js, chromedp.WithPollingTimeout(20*time.Second))
		return func(ctx context.Context, tg *chromedp.Target) (chromedp.Void, error) {
			_, err := p(ctx, tg)
			return chromedp.Void{}, err
		}
	}
	eval := func(js string) chromedp.Action[chromedp.Void] {
		e := chromedp.Evaluate[any](js)
		return func(ctx context.Context, tg *chromedp.Target) (chromedp.Void, error) {
			_, err := e(ctx, tg)
			return chromedp.Void{}, err
		}
	}
	page := h.base + "/models/bench-c"
	run("open the model page", chromedp.Navigate(page),
		eval(fmt.Sprintf(`sessionStorage.setItem("plumb.token", %q)`, reviewerToken)),
		chromedp.Navigate(page),
		until(`document.getElementById("acting").textContent.includes("r.okafor (reviewer)")`))
	if n, err := chromedp.Run(bctx, chromedp.Evaluate[int](`document.querySelectorAll("g.set-aside .hollow").length`)); err != nil || n != 0 {
		t.Fatalf("hollow points before the decision: %d (%v)", n, err)
	}
	row := `Array.from(document.querySelectorAll("table.points tr[data-obs]")).find(r => r.querySelector(".prov").textContent.endsWith("feed-1.csv:32"))`
	run("set the reading aside",
		until(row+` !== undefined`),
		eval(row+`.querySelector("input[name=note]").value = "valve left open during the run"`),
		eval(row+`.querySelector("button[data-decide=exclude]").click()`),
		until(`document.querySelectorAll("g.set-aside .hollow").length === 1`),
		until(`document.querySelector("section[data-set-aside]") !== null`))
	note, err := chromedp.Run(bctx, chromedp.Text(chromedp.CSS("section[data-set-aside] td.note")))
	if err != nil {
		t.Fatal(err)
	}
	want := "set aside by r.okafor on " + time.Now().UTC().Format(time.DateOnly) + ": valve left open during the run"
	if strings.TrimSpace(note) != want {
		t.Errorf("set-aside note %q, want %q", note, want)
	}
	title, err := chromedp.Run(bctx, chromedp.Evaluate[string](`document.querySelector("g.set-aside .hollow title").textContent`))
	if err != nil || !strings.Contains(title, want) {
		t.Errorf("hollow point's tooltip %q (%v), want it to carry %q", title, err, want)
	}
	if d := h.model(); d.N != 30 || len(d.SetAside) != 1 {
		t.Errorf("after the page's decision: fit of %d rows, %d set aside; want 30 and 1", d.N, len(d.SetAside))
	}
	var a view.AlertView
	for _, x := range h.alertsOf("suspect_point", "") {
		if strings.HasSuffix(x.Subject, ":32") {
			a = x
		}
	}
	if a.State != view.AlertResolved || a.Note != want {
		t.Errorf("alert %s %q, want resolved with %q", a.State, a.Note, want)
	}

	// From the alert list: a second suspect reading, set aside from its
	// alert's row (the note box gives the reason).
	h.appendRows("70,153.5") // line 33
	var second view.AlertView
	h.wait("the second suspect alert", func() bool {
		for _, a := range h.alertsOf("suspect_point", "open") {
			if strings.HasSuffix(a.Subject, ":33") {
				second = a
				return true
			}
		}
		return false
	})
	alertRow := fmt.Sprintf(`document.querySelector('tr[data-alert="%s"]')`, second.ID)
	run("set aside from the alert list",
		chromedp.Navigate(h.base+"/alerts"),
		until(alertRow+` !== null`),
		eval(alertRow+`.querySelector("input[name=note]").value = "sensor cable loose"`),
		eval(alertRow+`.querySelector("button[data-decide=exclude]").click()`),
		until(`document.getElementById("status").textContent.includes("set aside by r.okafor")`),
		chromedp.Navigate(page),
		until(`document.querySelectorAll("g.set-aside .hollow").length === 2`))
	h.wait("the second alert resolved by the decision", func() bool {
		var a view.AlertView
		h.get("/api/v1/alerts/"+second.ID, &a)
		return a.State == view.AlertResolved && strings.HasSuffix(a.Note, ": sensor cable loose") && a.By == "r.okafor"
	})

	// A quiet period set from the model page, as the reviewer, then
	// ended early from the same page.
	until10 := time.Now().UTC().Add(10 * time.Minute).Format("2006-01-02T15:04")
	quietForm := `document.querySelector("button[data-decide=quiet]").closest("form")`
	run("set a quiet period",
		eval(fmt.Sprintf(`%s.elements.end.value = %q`, quietForm, until10)),
		eval(quietForm+`.elements.note.value = "pump service"`),
		eval(`document.querySelector("button[data-decide=quiet]").click()`),
		until(`document.querySelector("tr[data-quiet-period]") !== null`),
		until(`document.querySelector("h1 .quiet-mark") !== null`))
	if q := h.model().QuietUntil; q.IsZero() {
		t.Errorf("the model is not quiet after the page set a period")
	}
	run("end it early",
		eval(`document.querySelector("tr[data-quiet-period] input[name=note]").value = "service done early"`),
		eval(`document.querySelector("button[data-decide=end-quiet]").click()`),
		until(`document.querySelector("tr[data-quiet-period]") === null`))
	if q := h.model().QuietUntil; !q.IsZero() {
		t.Errorf("the model is still quiet until %s after the page ended the period", q)
	}

	buf, err := chromedp.Run(bctx, chromedp.FullScreenshot(100))
	if err == nil {
		p := filepath.Join(browsertest.ArtifactDir(t), "decisions-model-page.png")
		if err := os.WriteFile(p, buf, 0o644); err != nil {
			t.Error(err)
		}
		t.Logf("screenshot: %s", p)
	}
	for _, p := range problems() {
		t.Errorf("browser: %s", p)
	}
}
