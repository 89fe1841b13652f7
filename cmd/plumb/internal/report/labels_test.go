package report

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/view/viewtest"
)

// TestWriteLabelsAndMissing: a row's label (the model's id column) is
// shown beside its file:line, in the row list and the fragility line, and
// the count of rows left out for a missing value is among the facts.
func TestWriteLabelsAndMissing(t *testing.T) {
	src := viewtest.Demo()
	d, err := src.Model(t.Context(), "bench-b")
	if err != nil {
		t.Fatal(err)
	}
	d.Points[16].Label = "SN-0417" // row 17, line 18: the suspect
	d.Fragility.Rows[0].Label = "SN-0417"
	d.Missing = 3
	src.SetModel(d)
	opts := Options{Generated: time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC)}
	c, err := Collect(t.Context(), src, "bench-b", opts)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := Render(&buf, c, opts); err != nil {
		t.Fatal(err)
	}
	html := buf.String()
	for _, want := range []string{
		`<td class="m">run-0314.csv:18 <b data-label>SN-0417</b></td>`,
		`<span class="m">run-0314.csv:18 SN-0417</span>`,
		`<div><span>rows missing a value (left out)</span><b data-missing>3</b></div>`,
	} {
		if !strings.Contains(html, want) {
			t.Errorf("report lacks %q", want)
		}
	}
}
