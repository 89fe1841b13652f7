package daemon

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"plumb/cmd/plumb/internal/view"
)

// A reading set aside leaves the refit and the online fit that judges
// arrivals (after the next refresh, and after a restart); its
// suspect-point alert resolves with the decision's note; reinstating
// brings it back.
func TestExcludeLeavesFitsAndOnline(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", false))
	rng := rand.New(rand.NewPCG(3, 3))
	file := filepath.Join(dir, "in", "a.csv")
	feed(t, file, rng, 0, 40, true)
	f, err := os.OpenFile(file, os.O_APPEND|os.O_WRONLY, 0)
	if err != nil {
		t.Fatal(err)
	}
	fmt.Fprintln(f, "40,30,40") // line 42: far off (expected 17) at a far x
	f.Close()

	r := start(t, c)
	v := r.d.View().(viewSource)
	model := func() view.ModelDetail {
		d, err := v.Model(ctx, "m")
		if err != nil {
			t.Fatal(err)
		}
		return d
	}
	waitFor(t, "a fit of 41 rows", func() bool { return model().N == 41 })
	var alertID string
	waitFor(t, "the suspect alert", func() bool {
		as, _ := v.Alerts(ctx, view.AlertFilter{Kind: "suspect_point", State: view.AlertOpen})
		if len(as) == 1 {
			alertID = as[0].ID
		}
		return len(as) == 1
	})
	dec, err := v.Exclude(ctx, "m", view.RowKey{Line: "a.csv:42"}, "r.okafor", "valve left open", alertID)
	if err != nil {
		t.Fatal(err)
	}
	waitFor(t, "the fit without it", func() bool { return model().N == 40 })
	waitFor(t, "the alert resolved with the note", func() bool {
		a, _ := v.Alert(ctx, alertID)
		return a.State == view.AlertResolved && a.Note == dec.Note
	})
	onlineMatches := func() bool {
		m := r.d.models["m"]
		m.mu.Lock()
		defer m.mu.Unlock()
		if m.ref.res == nil || m.online.N() != m.ref.res.Fit.N {
			return false
		}
		coef := m.online.Coef(nil)
		for i, c := range m.ref.res.Fit.Coef {
			if math.Abs(coef[i]-c.Estimate) > 1e-9*math.Max(1, math.Abs(c.Estimate)) {
				return false
			}
		}
		return true
	}
	waitFor(t, "the online fit without it", onlineMatches)

	// A restart keeps it out of both.
	r.stop(t)
	r = start(t, c)
	v = r.d.View().(viewSource)
	waitFor(t, "the fit without it after a restart", func() bool { d := model(); return d.N == 40 && len(d.SetAside) == 1 })
	waitFor(t, "the online fit without it after a restart", onlineMatches)

	if _, err := v.Reinstate(ctx, "m", view.RowKey{ID: dec.ObsID}, "r.okafor", "valve log checked"); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "the fit with it again", func() bool { d := model(); return d.N == 41 && len(d.SetAside) == 0 })
	waitFor(t, "the online fit with it again", onlineMatches)
}
