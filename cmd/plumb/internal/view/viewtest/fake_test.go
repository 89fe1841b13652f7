package viewtest

import (
	"context"
	"errors"
	"math"
	"testing"

	"plumb/cmd/plumb/internal/view"
)

// Identities of least squares (common practice): the leverages sum to p,
// Cook's D_i = r_i^2 h_i / (p (1 - h_i)), and the planted point of the demo
// data is the one suspect.
func TestStraightLineIdentities(t *testing.T) {
	d, err := StraightLine(Line{Name: "m", Response: "y", Predictor: "x", X: DemoX, Y: DemoY})
	if err != nil {
		t.Fatal(err)
	}
	var sumH float64
	for _, p := range d.Points {
		sumH += float64(p.Leverage)
	}
	if math.Abs(sumH-2) > 1e-12 {
		t.Errorf("sum of leverages = %v, want 2", sumH)
	}
	if d.Suspects != 1 || d.Points[16].Verdict != view.VerdictSuspect {
		t.Errorf("suspects = %d, row 16 verdict %q; want the planted row alone", d.Suspects, d.Points[16].Verdict)
	}
	if c := d.Cutoffs; math.Abs(float64(c.Leverage)-0.2) > 1e-15 || math.Abs(float64(c.CookSizeAdjusted)-0.2) > 1e-15 {
		t.Errorf("cutoffs %+v, want 2p/n = 4/n = 0.2", c)
	}
	if !(d.Cutoffs.TCritical > 3 && d.Cutoffs.TCritical < 4.5) {
		t.Errorf("Bonferroni critical |t| = %v for n = 20, want about 3.6", d.Cutoffs.TCritical)
	}
	if len(d.Curves) != 1 || len(d.Curves[0].X) != 41 {
		t.Fatalf("curves = %+v", d.Curves)
	}
}

func TestFakeLifecycle(t *testing.T) {
	ctx := context.Background()
	f := Demo()
	ms, err := f.Models(ctx)
	if err != nil || len(ms) != 3 || ms[0].Name != "bench-b" || ms[0].OpenAlerts != 2 {
		t.Fatalf("models = %+v, %v", ms, err)
	}
	if err := f.Ack(ctx, "sp-3c1d9a70b2e45f18", "looking", "me"); err != nil {
		t.Fatal(err)
	}
	if err := f.Ack(ctx, "sp-3c1d9a70b2e45f18", "", ""); !errors.Is(err, view.ErrState) {
		t.Errorf("second ack: %v, want ErrState", err)
	}
	if err := f.Resolve(ctx, "nope", ""); !errors.Is(err, view.ErrNotFound) {
		t.Errorf("resolve unknown: %v, want ErrNotFound", err)
	}
	if _, err := f.Model(ctx, "nope"); !errors.Is(err, view.ErrNotFound) {
		t.Errorf("model unknown: %v", err)
	}
	fits, _ := f.Fits(ctx, "bench-b", 3, 5)
	if len(fits) != 5 || fits[0].ID != 4 {
		t.Errorf("fits page = %d items from %d", len(fits), fits[0].ID)
	}
	al, _ := f.Alerts(ctx, view.AlertFilter{Limit: 2, Offset: 1})
	if len(al) != 2 {
		t.Errorf("alerts page = %d", len(al))
	}
	if c := f.Calls(); len(c) != 3 || c[0].Op != "ack" || c[0].Who != "me" {
		t.Errorf("calls = %+v", c)
	}
}

// The fake's latest-n reads are the tails of its paged lists.
func TestFakeRecent(t *testing.T) {
	ctx := context.Background()
	f := Demo()
	all, _ := f.Quarantine(ctx, "bench-b", 0, 0)
	if len(all) != 2 {
		t.Fatalf("demo quarantine = %d rows, want 2", len(all))
	}
	for _, tt := range []struct {
		model string
		n     int
		want  []view.QuarantineView
	}{
		{"bench-b", 1, all[1:]}, {"bench-b", 5, all}, {"bench-b", 0, all}, {"", -1, all}, {"nope", 3, nil},
	} {
		got, err := f.RecentQuarantine(ctx, tt.model, tt.n)
		if err != nil || len(got) != len(tt.want) {
			t.Errorf("RecentQuarantine(%q, %d) = %d rows, %v; want %d", tt.model, tt.n, len(got), err, len(tt.want))
			continue
		}
		for i := range got {
			if got[i].ID != tt.want[i].ID {
				t.Errorf("RecentQuarantine(%q, %d)[%d] = id %d, want %d", tt.model, tt.n, i, got[i].ID, tt.want[i].ID)
			}
		}
	}
	fits, _ := f.Fits(ctx, "bench-b", 0, 0)
	last, err := f.RecentFits(ctx, "bench-b", 3)
	if err != nil || len(last) != 3 || last[2].ID != fits[len(fits)-1].ID || last[0].ID != fits[len(fits)-3].ID {
		t.Errorf("RecentFits(3) = %v, %v; want the last 3 of %d", last, err, len(fits))
	}
	if _, err := f.RecentFits(ctx, "nope", 3); !errors.Is(err, view.ErrNotFound) {
		t.Errorf("RecentFits of an unknown model: %v, want ErrNotFound", err)
	}
}
