package alerts

import (
	"context"
	"strings"
	"testing"
)

// TestPointLabel: a suspect row with a label (the model's id column) is
// named by it in the subject, the summary, the explanation and the point
// detail; without one the subject stays PointSubject.
func TestPointLabel(t *testing.T) {
	h := newHarness(t, nil)
	ctx := context.Background()
	c := suspectRow(212)
	c.Label = "SN-0417"
	a, err := h.m.Point(ctx, c)
	if err != nil || a == nil {
		t.Fatalf("Point: %v, %v", a, err)
	}
	if want := "bench-b/feed.csv:212 [SN-0417]"; a.Subject != want || LabeledPointSubject("bench-b", "feed.csv", 212, "SN-0417") != want {
		t.Errorf("subject %q, want %q", a.Subject, want)
	}
	if !strings.HasPrefix(a.Summary, `Row "SN-0417", line 212 of feed.csv (model bench-b),`) {
		t.Errorf("summary %q", a.Summary)
	}
	if !strings.Contains(a.Explanation, `feed.csv, line 212 (row "SN-0417"), lies far`) {
		t.Errorf("explanation %q", a.Explanation)
	}
	if a.Point == nil || a.Point.Label != "SN-0417" {
		t.Errorf("point detail %+v", a.Point)
	}
	if LabeledPointSubject("bench-b", "feed.csv", 212, "") != PointSubject("bench-b", "feed.csv", 212) {
		t.Error("a row without a label changed its subject")
	}
}
