package daemon

import (
	"context"
	"path/filepath"
	"slices"
	"testing"

	"plumb/store"
)

// TestGroupWithIDAndMissing: a model with a group term, an id column and
// missing-value tokens. A row whose number or group label is "NA" is left
// out and counted, not quarantined nor given a level; the rows kept carry
// their id-column text and their group label, before and after a restart.
// Invented data.
func TestGroupWithIDAndMissing(t *testing.T) {
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "g"
folder = "in"
response = "y"
terms = ["x", "group(lot)"]
id_column = "sample"
missing = ["NA"]
`)
	file := filepath.Join(dir, "in", "a.csv")
	appendFile(t, file, "sample,x,lot,y\n"+
		"s01,1,A,1.02\ns02,2,B,2.71\ns03,3,A,2.98\ns04,4,NA,4.00\ns05,5,B,5.83\n"+
		"s06,6,A,5.97\ns07,7,B,7.79\ns08,8,A,NA\ns09,8,A,8.05\ns10,9,B,9.84\n")
	r := start(t, c)
	ctx := context.Background()
	waitFor(t, "a fit of 8 rows", func() bool {
		f, err := r.d.store.LastFit(ctx, "g")
		return err == nil && f.N == 8
	})
	check := func(when string) {
		t.Helper()
		f, _ := r.d.store.LastFit(ctx, "g")
		if !slices.Equal(f.Terms, []string{"intercept", "x", "lot=B"}) {
			t.Errorf("%s: terms %v, want no level for NA", when, f.Terms)
		}
		if q, _ := r.d.store.Quarantined(ctx, "g", 0, 10); len(q) != 0 {
			t.Errorf("%s: quarantined %+v, want none", when, q)
		}
		obs, err := r.d.store.Observations(ctx, "g", store.ObsQuery{})
		if err != nil {
			t.Fatal(err)
		}
		var ids []string
		for _, o := range obs {
			ids = append(ids, o.Label)
		}
		if want := []string{"s01", "s02", "s03", "s05", "s06", "s07", "s09", "s10"}; !slices.Equal(ids, want) {
			t.Errorf("%s: stored ids %v, want %v", when, ids, want)
		}
		d, err := r.d.View().Model(ctx, "g")
		if err != nil {
			t.Fatal(err)
		}
		if len(d.Points) != 8 {
			t.Fatalf("%s: %d points, want 8", when, len(d.Points))
		}
		if p := d.Points[3]; p.Labels["lot"] != "B" || p.Label != "s05" {
			t.Errorf("%s: point 4 %+v, want lot B named s05", when, p)
		}
	}
	check("first run")
	d, _ := r.d.View().Model(ctx, "g")
	if d.Missing != 2 {
		t.Errorf("missing %d, want 2 (one number, one group label)", d.Missing)
	}
	r.stop(t)
	r = start(t, c)
	waitFor(t, "a fit after restart", func() bool {
		d, err := r.d.View().Model(ctx, "g")
		return err == nil && len(d.Points) == 8
	})
	check("after restart")
}
