package web

import (
	"context"
	"io"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/view/viewtest"
)

// TestAlertPage serves the page of the demo's suspect-point alert and of
// the fragile-fit alert, and the 404 of an unknown id.
func TestAlertPage(t *testing.T) {
	src := viewtest.Demo()
	srv := httptest.NewServer(New(src, Options{}))
	defer srv.Close()
	get := func(path string) (int, string) {
		t.Helper()
		resp, err := http.Get(srv.URL + path)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		return resp.StatusCode, string(b)
	}
	d, _ := src.Model(context.Background(), "bench-b")
	p := d.Points[16]

	code, body := get("/alerts/sp-3c1d9a70b2e45f18")
	if code != http.StatusOK {
		t.Fatalf("status %d\n%s", code, body)
	}
	want := []string{
		`<code data-alert-id>sp-3c1d9a70b2e45f18</code>`,
		`plumb ack --config plumb.toml sp-3c1d9a70b2e45f18`,
		`<b>run-0314.csv:18</b> <b class="row-label" data-label>gauge K-0418</b> · row 16 of the current fit`,
		`data-suggestion>` + escaped(d.Suggestions[0].Text),
		`<li data-event="opened">`,
		`class="highlight"`,
		`data-act="ack" data-id="sp-3c1d9a70b2e45f18"`,
	}
	for _, fl := range p.Flags {
		want = append(want, `<tr data-measure="`+fl.Measure+`">`, escaped(fl.Text()))
	}
	for _, w := range want {
		if !strings.Contains(body, w) {
			t.Errorf("alert page lacks %q", w)
		}
	}
	if n := strings.Count(body, `class="highlight"`); n != 3 {
		t.Errorf("%d rings, want the reading ringed on each of the 3 charts", n)
	}

	code, body = get("/alerts/ff-9e02b4c6d1a8f357")
	if code != http.StatusOK {
		t.Fatalf("fragile page status %d", code)
	}
	for _, w := range []string{`<li class="prov">run-0314.csv:18</li>`, `fragility index 1: removing that many rows changes a conclusion; at or below the limit 2`, `Ringed: run-0314.csv:18.`} {
		if !strings.Contains(body, w) {
			t.Errorf("fragile-fit page lacks %q", w)
		}
	}

	// Every alert row of the list links to its page.
	_, body = get("/alerts")
	for _, id := range []string{"sp-3c1d9a70b2e45f18", "ff-9e02b4c6d1a8f357", "bl-51f7e0a2c39d6b84", "dr-07aa4be19c2f6d35"} {
		if !strings.Contains(body, `href="/alerts/`+id+`"`) {
			t.Errorf("alert list does not link to %s", id)
		}
	}
	if code, _ := get("/alerts/sp-0000000000000000"); code != http.StatusNotFound {
		t.Errorf("unknown alert: status %d, want 404", code)
	}
}

// escaped escapes s as html/template writes text.
func escaped(s string) string {
	return strings.NewReplacer("&", "&amp;", "'", "&#39;", "<", "&lt;", ">", "&gt;", `"`, "&#34;").Replace(s)
}
