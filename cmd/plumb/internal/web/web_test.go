package web

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"net/url"
	"strings"
	"testing"

	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"

	"plumb/cmd/plumb/internal/metrics"
	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

type call struct {
	method, path, body string
	remote             string // default 127.0.0.1:5555
	host               string // default 127.0.0.1:8467
	header             map[string]string
}

func serve(t testing.TB, h http.Handler, c call) *httptest.ResponseRecorder {
	t.Helper()
	var body io.Reader
	if c.body != "" {
		body = strings.NewReader(c.body)
	}
	r := httptest.NewRequest(c.method, c.path, body)
	r.RemoteAddr = "127.0.0.1:5555"
	r.Host = "127.0.0.1:8467"
	if c.remote != "" {
		r.RemoteAddr = c.remote
	}
	if c.host != "" {
		r.Host = c.host
	}
	if c.body != "" {
		r.Header.Set("Content-Type", "application/json")
	}
	for k, v := range c.header {
		r.Header.Set(k, v)
	}
	w := httptest.NewRecorder()
	h.ServeHTTP(w, r)
	return w
}

func decode[T any](t testing.TB, w *httptest.ResponseRecorder) T {
	t.Helper()
	var v T
	if err := json.Unmarshal(w.Body.Bytes(), &v); err != nil {
		t.Fatalf("decode %T: %v\n%s", v, err, w.Body.String())
	}
	return v
}

func TestReadEndpoints(t *testing.T) {
	m := metrics.New()
	m.RowsIngested("bench-b", 20)
	h := New(viewtest.Demo(), Options{Registry: m.Registry()})
	tests := []struct {
		name     string
		path     string
		status   int
		ctype    string
		contains string
	}{
		{"healthz", "/healthz", 200, "text/plain", "ok"},
		{"readyz", "/readyz", 200, "text/plain", "ready"},
		{"metrics", "/metrics", 200, "text/plain", "plumb_rows_ingested_total"},
		{"version", "/api/v1/version", 200, "application/json", `"version"`},
		{"models", "/api/v1/models", 200, "application/json", `"name":"bench-b"`},
		{"model", "/api/v1/models/bench-b", 200, "application/json", `"t_critical"`},
		{"model flagged points", "/api/v1/models/bench-b?points=flagged", 200, "application/json", `"points_omitted":19`},
		{"model no points", "/api/v1/models/bench-b?points=none", 200, "application/json", `"points":[],`},
		{"model bad points", "/api/v1/models/bench-b?points=some", 400, "application/json", `points \"some\"`},
		{"model missing", "/api/v1/models/nope", 404, "application/json", `"error":"model \"nope\": view: not found"`},
		{"fits", "/api/v1/models/bench-b/fits", 200, "application/json", `"estimates"`},
		{"fits of missing model", "/api/v1/models/nope/fits", 404, "application/json", `not found`},
		{"observations", "/api/v1/models/bench-b/observations?limit=2", 200, "application/json", `"raw"`},
		{"quarantine", "/api/v1/quarantine", 200, "application/json", `"column":6,"column_name":"ref_kpa","field":2,"raw":"71.4,4O","reason":"column 2 \"ref_kpa\": not a number","at":"2026-03-14T09:18:00Z"`},
		{"quarantine by model", "/api/v1/quarantine?model=oven-3", 200, "application/json", `"items":[]`},
		{"alerts", "/api/v1/alerts", 200, "application/json", `"kind":"suspect_point"`},
		{"alerts by state", "/api/v1/alerts?state=acknowledged", 200, "application/json", `"bl-51f7e0a2c39d6b84"`},
		{"alerts bad state", "/api/v1/alerts?state=closed", 400, "application/json", `state \"closed\"`},
		{"alert", "/api/v1/alerts/sp-3c1d9a70b2e45f18", 200, "application/json", `"caution"`},
		{"alert missing", "/api/v1/alerts/nope", 404, "application/json", `not found`},
		{"bad limit", "/api/v1/models/bench-b/fits?limit=0", 400, "application/json", `limit \"0\"`},
		{"bad after", "/api/v1/models/bench-b/fits?after=x", 400, "application/json", `after \"x\"`},
		{"unknown api", "/api/v1/nothing", 404, "application/json", `no such endpoint`},
		{"overview page", "/", 200, "text/html", `data-model="flow-rig"`},
		{"model page", "/models/bench-b", 200, "text/html", `data-chart="cooks"`},
		{"model page quarantine", "/models/bench-b", 200, "text/html", `run-0314.csv:23:1, column &#34;output_mv&#34; (field 1)</td>`},
		{"model page quarantine time", "/models/bench-b", 200, "text/html", `<td class="t">2026-03-14 09:28:00Z</td>`},
		{"model page other x", "/models/bench-b?x=zzz", 200, "text/html", `data-chart="fit"`},
		{"model page missing", "/models/nope", 404, "text/html", `not found`},
		{"waiting model page", "/models/flow-rig", 200, "text/html", `No fit yet`},
		{"alerts page", "/alerts", 200, "text/html", `data-act="ack"`},
		{"alerts page bad state", "/alerts?state=zz", 400, "text/html", `state &#34;zz&#34;`},
		{"stylesheet", "/static/plumb.css", 200, "text/css", "--paper"},
		{"script", "/static/plumb.js", 200, "javascript", "sessionStorage"},
		{"not a page", "/nowhere", 404, "text/plain", ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			w := serve(t, h, call{method: "GET", path: tt.path})
			if w.Code != tt.status {
				t.Fatalf("status %d, want %d\n%s", w.Code, tt.status, w.Body.String())
			}
			if ct := w.Header().Get("Content-Type"); !strings.Contains(ct, tt.ctype) {
				t.Errorf("Content-Type %q, want %q", ct, tt.ctype)
			}
			if !strings.Contains(w.Body.String(), tt.contains) {
				t.Errorf("body lacks %q:\n%.2000s", tt.contains, w.Body.String())
			}
		})
	}
}

// Every page carries the caution line.
func TestPagesCarryCaution(t *testing.T) {
	h := New(viewtest.Demo(), Options{})
	for _, p := range []string{"/", "/models/bench-b", "/models/oven-3", "/alerts", "/models/nope"} {
		w := serve(t, h, call{method: "GET", path: p})
		if !strings.Contains(w.Body.String(), "it never deletes or alters a measurement") {
			t.Errorf("%s: no caution line", p)
		}
	}
}

func TestReadyz(t *testing.T) {
	src := viewtest.Demo()
	src.SetReady(errors.New("first scan of bench-b running"))
	w := serve(t, New(src, Options{}), call{method: "GET", path: "/readyz"})
	if w.Code != 503 || !strings.Contains(w.Body.String(), "first scan") {
		t.Errorf("readyz = %d %q, want 503 with the reason", w.Code, w.Body.String())
	}
}

func TestSourceFailure(t *testing.T) {
	src := viewtest.Demo()
	src.FailWith(errors.New("database is locked"))
	h := New(src, Options{})
	for _, p := range []string{"/api/v1/models", "/api/v1/alerts", "/api/v1/models/bench-b/fits", "/"} {
		w := serve(t, h, call{method: "GET", path: p})
		if w.Code != 500 || !strings.Contains(w.Body.String(), "database is locked") {
			t.Errorf("%s: %d %q, want 500 with the message", p, w.Code, w.Body.String())
		}
	}
}

func TestMetricsParse(t *testing.T) {
	m := metrics.New()
	m.AddModel("bench-b")
	m.FitState("bench-b", 20, 3.9, 1, true)
	h := New(viewtest.Demo(), Options{Registry: m.Registry()})
	w := serve(t, h, call{method: "GET", path: "/metrics"})
	p := expfmt.NewTextParser(model.LegacyValidation)
	fams, err := p.TextToMetricFamilies(w.Body)
	if err != nil {
		t.Fatal(err)
	}
	if _, ok := fams["plumb_model_fragility_index"]; !ok {
		t.Error("no plumb_model_fragility_index family")
	}
	// OpenMetrics 1.0 when asked for: its content type and the closing # EOF.
	w = serve(t, h, call{method: "GET", path: "/metrics",
		header: map[string]string{"Accept": "application/openmetrics-text; version=1.0.0"}})
	if ct := w.Header().Get("Content-Type"); !strings.HasPrefix(ct, "application/openmetrics-text") {
		t.Errorf("OpenMetrics content type %q", ct)
	}
	if !strings.HasSuffix(w.Body.String(), "# EOF\n") {
		t.Error("OpenMetrics exposition without # EOF")
	}
	w = serve(t, New(viewtest.Demo(), Options{}), call{method: "GET", path: "/metrics"})
	if w.Code != 404 {
		t.Errorf("metrics without a registry: %d, want 404", w.Code)
	}
}

func TestVersionETag(t *testing.T) {
	src := viewtest.Demo()
	h := New(src, Options{})
	w := serve(t, h, call{method: "GET", path: "/api/v1/version"})
	etag := w.Header().Get("ETag")
	if etag == "" {
		t.Fatal("no ETag")
	}
	w = serve(t, h, call{method: "GET", path: "/api/v1/version", header: map[string]string{"If-None-Match": etag}})
	if w.Code != http.StatusNotModified {
		t.Errorf("unchanged: %d, want 304", w.Code)
	}
	if w := serve(t, h, call{method: "POST", path: "/api/v1/alerts/sp-3c1d9a70b2e45f18/ack", body: `{}`}); w.Code != 200 {
		t.Fatalf("ack: %d %s", w.Code, w.Body.String())
	}
	w = serve(t, h, call{method: "GET", path: "/api/v1/version", header: map[string]string{"If-None-Match": etag}})
	if w.Code != 200 || w.Header().Get("ETag") == etag {
		t.Errorf("after an ack: %d, etag %s; want a new version", w.Code, w.Header().Get("ETag"))
	}
}

// Pagination: follow next links until the end and see every item once.
func TestPagination(t *testing.T) {
	src := viewtest.Demo()
	h := New(src, Options{})
	all, _ := src.Fits(t.Context(), "bench-b", 0, 0)
	type fitsPage struct {
		Items []view.FitView `json:"items"`
		Next  string         `json:"next"`
	}
	var seen []int64
	next := "/api/v1/models/bench-b/fits?limit=5"
	for pages := 0; next != ""; pages++ {
		if pages > 10 {
			t.Fatal("pagination does not end")
		}
		w := serve(t, h, call{method: "GET", path: next})
		if w.Code != 200 {
			t.Fatalf("%s: %d", next, w.Code)
		}
		p := decode[fitsPage](t, w)
		if len(p.Items) > 5 {
			t.Fatalf("page of %d items, limit 5", len(p.Items))
		}
		for _, f := range p.Items {
			seen = append(seen, f.ID)
		}
		next = p.Next
	}
	if len(seen) != len(all) {
		t.Fatalf("saw %d fits over the pages, want %d", len(seen), len(all))
	}
	for i := range seen {
		if seen[i] != all[i].ID {
			t.Fatalf("item %d: id %d, want %d", i, seen[i], all[i].ID)
		}
	}
	// The last page has no next; a limit beyond MaxLimit is capped.
	w := serve(t, h, call{method: "GET", path: fmt.Sprintf("/api/v1/models/bench-b/fits?limit=%d", MaxLimit+50)})
	if p := decode[fitsPage](t, w); p.Next != "" || len(p.Items) != len(all) {
		t.Errorf("capped limit: %d items, next %q", len(p.Items), p.Next)
	}

	// Alerts are paged by offset.
	type alertsPage struct {
		Items []view.AlertView `json:"items"`
		Next  string           `json:"next"`
	}
	var ids []string
	next = "/api/v1/alerts?limit=3"
	for next != "" {
		p := decode[alertsPage](t, serve(t, h, call{method: "GET", path: next}))
		for _, a := range p.Items {
			ids = append(ids, a.ID)
		}
		next = p.Next
		if next != "" {
			u, _ := url.Parse(next)
			if u.Query().Get("offset") != "3" {
				t.Errorf("next %q, want offset=3", next)
			}
		}
	}
	if len(ids) != 4 {
		t.Errorf("alerts over pages: %v, want 4", ids)
	}
	// Observations: after skips what was seen.
	type obsPage struct {
		Items []view.ObservationView `json:"items"`
	}
	p := decode[obsPage](t, serve(t, h, call{method: "GET", path: "/api/v1/models/bench-b/observations?after=18"}))
	if len(p.Items) != 2 || p.Items[0].ID != 19 {
		t.Errorf("observations after 18: %+v", p.Items)
	}
}

// Who may act: token, loopback and cross-origin rules.
func TestActionRules(t *testing.T) {
	const ack = "/api/v1/alerts/sp-3c1d9a70b2e45f18/ack"
	const res = "/api/v1/alerts/sp-3c1d9a70b2e45f18/resolve"
	tests := []struct {
		name   string
		token  string
		c      call
		status int
		state  string // the alert's state afterwards
	}{
		{"loopback v4 without token", "", call{method: "POST", path: ack, body: `{"note":"n","by":"b"}`}, 200, view.AlertAcknowledged},
		{"loopback v6 without token", "", call{method: "POST", path: ack, remote: "[::1]:4000"}, 200, view.AlertAcknowledged},
		{"localhost name without token", "", call{method: "POST", path: ack, host: "localhost:8467"}, 200, view.AlertAcknowledged},
		{"rebound name without token", "", call{method: "POST", path: ack, host: "plumb.attacker.example:8467"}, 403, view.AlertOpen},
		{"rebound name with token", "s3cret", call{method: "POST", path: ack, host: "plumb.lab.example",
			header: map[string]string{"Authorization": "Bearer s3cret"}}, 200, view.AlertAcknowledged},
		{"remote without token", "", call{method: "POST", path: ack, remote: "192.0.2.7:4000"}, 403, view.AlertOpen},
		{"remote with right token", "s3cret", call{method: "POST", path: ack, remote: "192.0.2.7:4000",
			header: map[string]string{"Authorization": "Bearer s3cret"}}, 200, view.AlertAcknowledged},
		{"loopback with wrong token", "s3cret", call{method: "POST", path: ack,
			header: map[string]string{"Authorization": "Bearer s3cre"}}, 401, view.AlertOpen},
		{"token missing", "s3cret", call{method: "POST", path: ack}, 401, view.AlertOpen},
		{"basic scheme", "s3cret", call{method: "POST", path: ack,
			header: map[string]string{"Authorization": "Basic s3cret"}}, 401, view.AlertOpen},
		{"cross-origin browser", "", call{method: "POST", path: ack,
			header: map[string]string{"Sec-Fetch-Site": "cross-site", "Origin": "http://elsewhere.example"}}, 403, view.AlertOpen},
		{"not json", "", call{method: "POST", path: ack, body: "note=x",
			header: map[string]string{"Content-Type": "application/x-www-form-urlencoded"}}, 400, view.AlertOpen},
		{"unknown field", "", call{method: "POST", path: ack, body: `{"nope":1}`}, 400, view.AlertOpen},
		{"resolve", "", call{method: "POST", path: res, body: `{"note":"re-measured"}`}, 200, view.AlertResolved},
		{"get is not allowed", "", call{method: "GET", path: ack}, 405, view.AlertOpen},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			src := viewtest.Demo()
			h := New(src, Options{Token: tt.token})
			w := serve(t, h, tt.c)
			if w.Code != tt.status {
				t.Fatalf("status %d, want %d: %s", w.Code, tt.status, w.Body.String())
			}
			if w.Code >= 400 {
				if e := decode[errorBody](t, w); e.Error == "" {
					t.Error("error without a message")
				}
			}
			if w.Code == 401 && w.Header().Get("WWW-Authenticate") == "" {
				t.Error("401 without WWW-Authenticate")
			}
			a, _ := src.Alert(t.Context(), "sp-3c1d9a70b2e45f18")
			if a.State != tt.state {
				t.Errorf("alert state %q, want %q", a.State, tt.state)
			}
			if w.Code == 200 {
				if got := decode[view.AlertView](t, w); got.State != tt.state {
					t.Errorf("response shows %q, want %q", got.State, tt.state)
				}
			}
		})
	}
}

func TestActionConflicts(t *testing.T) {
	src := viewtest.Demo()
	h := New(src, Options{})
	// Acknowledging an acknowledged alert conflicts; an unknown one is 404.
	if w := serve(t, h, call{method: "POST", path: "/api/v1/alerts/bl-51f7e0a2c39d6b84/ack"}); w.Code != 409 {
		t.Errorf("ack of acknowledged: %d, want 409", w.Code)
	}
	if w := serve(t, h, call{method: "POST", path: "/api/v1/alerts/dr-07aa4be19c2f6d35/resolve"}); w.Code != 409 {
		t.Errorf("resolve of resolved: %d, want 409", w.Code)
	}
	if w := serve(t, h, call{method: "POST", path: "/api/v1/alerts/nope/ack"}); w.Code != 404 {
		t.Errorf("ack of unknown: %d, want 404", w.Code)
	}
	calls := src.Calls()
	if len(calls) != 3 {
		t.Errorf("source saw %d calls, want 3", len(calls))
	}
}

func TestTokenEqual(t *testing.T) {
	for _, tt := range []struct {
		a, b string
		want bool
	}{{"x", "x", true}, {"x", "y", false}, {"", "x", false}, {"abc", "abcd", false}} {
		if got := tokenEqual(tt.a, tt.b); got != tt.want {
			t.Errorf("tokenEqual(%q, %q) = %v", tt.a, tt.b, got)
		}
	}
}

func TestLoopbackHost(t *testing.T) {
	for _, tt := range []struct {
		host string
		want bool
	}{{"localhost", true}, {"LOCALHOST:80", true}, {"a.localhost:1", true}, {"127.0.0.1:8467", true},
		{"[::1]:8467", true}, {"::1", true}, {"example.org", false}, {"10.1.2.3:80", false}, {"", false}} {
		if got := loopbackHost(tt.host); got != tt.want {
			t.Errorf("loopbackHost(%q) = %v", tt.host, got)
		}
	}
}

func TestLoopback(t *testing.T) {
	for _, tt := range []struct {
		addr string
		want bool
	}{{"127.0.0.1:1", true}, {"127.8.9.1:1", true}, {"[::1]:80", true}, {"10.0.0.1:80", false},
		{"[2001:db8::1]:80", false}, {"garbage", false}, {"", false}} {
		if got := loopback(tt.addr); got != tt.want {
			t.Errorf("loopback(%q) = %v", tt.addr, got)
		}
	}
}
