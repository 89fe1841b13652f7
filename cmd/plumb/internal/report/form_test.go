package report

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/view/viewtest"
)

// TestReportForm: the report has the checks of the model form in words,
// the weighting and the poolability verdict.
func TestReportForm(t *testing.T) {
	opts := Options{Generated: time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC)}
	c, err := Collect(t.Context(), viewtest.DemoForm(), "bench-b", opts)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := Render(&buf, c, opts); err != nil {
		t.Fatal(err)
	}
	html := buf.String()
	for _, want := range []string{"Does the model form hold?", "weighted by inverse(ref_kpa)", `data-check="Durbin-Watson"`,
		"PRESS =", "Can the groups be pooled?", "common slope", "qualified staff"} {
		if !strings.Contains(html, want) {
			t.Errorf("report lacks %q", want)
		}
	}
}
