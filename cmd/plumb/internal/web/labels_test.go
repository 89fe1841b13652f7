package web

import (
	"net/http"
	"strings"
	"testing"

	"plumb/cmd/plumb/internal/view"
	"plumb/cmd/plumb/internal/view/viewtest"
)

// TestLabelsAndMissing: the dashboard shows a row's label (the model's id
// column) beside its file:line and the rows left out for a missing
// value, and the API carries both.
func TestLabelsAndMissing(t *testing.T) {
	src := viewtest.Demo()
	d, err := src.Model(t.Context(), "bench-b")
	if err != nil {
		t.Fatal(err)
	}
	d.Points[16].Label = "SN-0417" // row 17, line 18: the suspect
	d.Missing = 3
	src.SetModel(d)
	h := New(src, Options{})

	page := serve(t, h, call{method: "GET", path: "/models/bench-b"})
	if page.Code != http.StatusOK {
		t.Fatalf("model page: %d", page.Code)
	}
	for _, want := range []string{`run-0314.csv:18 <b class="row-label" data-label>SN-0417</b>`, "3 more had a missing value"} {
		if !strings.Contains(page.Body.String(), want) {
			t.Errorf("model page lacks %q", want)
		}
	}
	over := serve(t, h, call{method: "GET", path: "/"})
	if !strings.Contains(over.Body.String(), `<dd data-missing>3</dd>`) {
		t.Errorf("overview lacks the missing count")
	}
	api := decode[view.ModelDetail](t, serve(t, h, call{method: "GET", path: "/api/v1/models/bench-b"}))
	if api.Missing != 3 || api.Points[16].Label != "SN-0417" {
		t.Errorf("API: missing %d, label %q; want 3, SN-0417", api.Missing, api.Points[16].Label)
	}
}
