package alerts

import (
	"context"
	"encoding/json"
	"testing"
	"time"
)

// A quiet period holds the events of the alerts raised under it (they are
// stored, marked held), and its end sends one summary per route, once,
// however often the summary is asked for.
func TestQuietHoldsAndSummarisesOnce(t *testing.T) {
	quietUntil := time.Time{}
	h := newHarness(t, func(c *Config) {
		c.Quiet = func(model string, now time.Time) bool { return model == "bench-b" && now.Before(quietUntil) }
	})
	ctx := context.Background()
	quietUntil = h.clock.Now().Add(time.Hour)

	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if !a.Held || a.State != StateOpen {
		t.Fatalf("alert under quiet: held %v state %s, want held and open", a.Held, a.State)
	}
	mustAlert(t)(h.m.Point(ctx, suspectRow(213)))
	if n := len(h.l.all()); n != 0 {
		t.Fatalf("%d deliveries enqueued under quiet, want 0", n)
	}
	// One of the two clears before the end: only the other is summarised.
	c := suspectRow(213)
	c.Outlier, c.Influential, c.Measures = false, false, nil
	mustAlert(t)(h.m.Point(ctx, c))
	if n := len(h.l.all()); n != 0 {
		t.Fatalf("%d deliveries after a resolution under quiet, want 0", n)
	}

	h.clock.Add(time.Hour)
	p := QuietPeriod{Key: "7", Model: "bench-b", Start: quietUntil.Add(-time.Hour), End: quietUntil, Owner: "j.doe", Reason: "pump service"}
	all := func(string) bool { return true }
	for i := range 3 { // repeated, as after a restart
		n, err := h.m.QuietSummary(ctx, p, all, h.clock.Now())
		if err != nil {
			t.Fatal(err)
		}
		if n != 1 {
			t.Fatalf("call %d: summary names %d alerts, want 1", i, n)
		}
	}
	ds := h.l.all()
	if len(ds) != len(testRoutes()) {
		t.Fatalf("%d deliveries, want one per route (%d)", len(ds), len(testRoutes()))
	}
	for _, d := range ds {
		e, err := DecodeEvent(d.Payload)
		if err != nil {
			t.Fatal(err)
		}
		if e.Type != SummaryType || e.ID != SummaryEventID("7") {
			t.Errorf("event %s of type %s, want %s %s", e.ID, e.Type, SummaryEventID("7"), SummaryType)
		}
		var doc QuietSummaryDoc
		if err := json.Unmarshal(e.Data, &doc); err != nil {
			t.Fatal(err)
		}
		if len(doc.Open) != 1 || doc.Open[0].ID != a.ID || doc.Caution == "" {
			t.Errorf("summary lists %d alerts (want only %s) with caution %q", len(doc.Open), a.ID, doc.Caution)
		}
	}
	// After the period, events flow again.
	mustAlert(t)(h.m.Point(ctx, suspectRow(214)))
	if n := len(h.l.all()); n != 2*len(testRoutes()) {
		t.Fatalf("%d deliveries after the period, want %d", n, 2*len(testRoutes()))
	}
}

// Nothing open at the end of a quiet period: no summary.
func TestQuietSummaryNothingOpen(t *testing.T) {
	h := newHarness(t, nil)
	n, err := h.m.QuietSummary(context.Background(), QuietPeriod{Key: "1"}, func(string) bool { return true }, h.clock.Now())
	if err != nil || n != 0 || len(h.l.all()) != 0 {
		t.Fatalf("got %d, %v, %d deliveries; want nothing", n, err, len(h.l.all()))
	}
}

// ResolveBy names who resolved the alert.
func TestResolveBy(t *testing.T) {
	h := newHarness(t, nil)
	ctx := context.Background()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	r := mustAlert(t)(h.m.ResolveBy(ctx, a.ID, "set aside by r.okafor on 2026-05-04: valve left open", "r.okafor"))
	if r.Resolution == nil || r.Resolution.By != "r.okafor" || r.Resolution.Auto {
		t.Fatalf("resolution %+v, want by r.okafor, not auto", r.Resolution)
	}
}
