package sqlite_test

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"testing"
	"time"

	"plumb/engine"
	"plumb/store"
)

// TestIngestBoundValuesReadBack ingests batches whose every bound value
// differs (large ids and lines, NaN and extreme numbers, flags with terms,
// times) while the garbage collector runs, and reads each value back
// exactly: the ingest binds values from blocks it reuses between batches,
// so a batch must not see the previous one's values nor lose its own.
func TestIngestBoundValuesReadBack(t *testing.T) {
	db, _ := openTemp(t)
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(7, 8))
	stop := make(chan struct{})
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		for {
			select {
			case <-stop:
				return
			default:
				runtime.GC()
			}
		}
	}()
	defer func() { close(stop); wg.Wait() }()

	at := time.Date(2026, 5, 1, 0, 0, 0, 0, time.UTC)
	line := 100_000
	var want []store.Observation
	for batch := 0; batch < 4; batch++ {
		n := 300 + 150*batch // a larger batch each time: the blocks grow
		obs := make([]store.Observation, n)
		for i := range obs {
			line += 1 + rng.IntN(3)
			o := store.Observation{
				Line:      line,
				Raw:       fmt.Sprintf("%d,%.17g", line, rng.NormFloat64()),
				Values:    []float64{rng.NormFloat64() * 1e6, rng.Float64(), -rng.ExpFloat64()},
				ArrivedAt: at.Add(time.Duration(line) * time.Millisecond),
			}
			if i%3 != 0 {
				o.Time = at.Add(time.Duration(rng.Int64N(1e15)))
			}
			if i%5 != 0 {
				d := &store.Diagnostics{
					Leverage: rng.Float64(), Residual: rng.NormFloat64(), StudentizedInternal: rng.NormFloat64(),
					StudentizedExternal: rng.NormFloat64(), CooksDistance: rng.ExpFloat64(), DFFITS: rng.NormFloat64(),
					DFBETAS: []float64{rng.NormFloat64(), rng.NormFloat64(), rng.NormFloat64()}, COVRATIO: 1 + rng.NormFloat64(),
					OutlierPBonferroni: rng.Float64(), Verdict: engine.WordOrdinary,
				}
				if i%7 == 0 {
					d.Residual, d.CooksDistance = math.NaN(), math.MaxFloat64
				}
				if i%4 == 0 {
					d.Verdict = engine.WordSuspect
					d.Flags = []engine.Flag{
						{Measure: engine.MeasureDFBETAS, Family: engine.FamilyAbsolute, Term: fmt.Sprintf("x%d^2", i), Value: rng.NormFloat64(), Cutoff: 1},
						{Measure: engine.MeasureBonferroni, Family: engine.FamilyTest, Value: 1e-9 * rng.Float64(), Cutoff: 0.05},
					}
				}
				o.Arrival = d
			}
			obs[i] = o
		}
		b := store.Batch{
			Source:       store.Source{Model: "m", Path: "feed.csv", Generation: 1, Offset: int64(line) * 50, Line: line, Size: int64(line) * 50},
			Observations: obs,
		}
		ids, err := db.Ingest(ctx, b)
		if err != nil {
			t.Fatal(err)
		}
		for i := range obs {
			obs[i].ID = ids[i]
		}
		want = append(want, obs...)
	}
	got, err := db.Observations(ctx, "m", store.ObsQuery{})
	if err != nil {
		t.Fatal(err)
	}
	if len(got) != len(want) {
		t.Fatalf("%d observations read back, want %d", len(got), len(want))
	}
	same := func(a, b float64) bool { return a == b || (math.IsNaN(a) && math.IsNaN(b)) }
	sameAll := func(a, b []float64) bool {
		if len(a) != len(b) {
			return false
		}
		for i := range a {
			if !same(a[i], b[i]) {
				return false
			}
		}
		return true
	}
	for i, w := range want {
		g := got[i]
		if g.ID != w.ID || g.Line != w.Line || g.Raw != w.Raw || !sameAll(g.Values, w.Values) ||
			!g.Time.Equal(w.Time) || !g.ArrivedAt.Equal(w.ArrivedAt) || (g.Arrival == nil) != (w.Arrival == nil) {
			t.Fatalf("observation %d: got %+v, want %+v", i, g, w)
		}
		if w.Arrival == nil {
			continue
		}
		gd, wd := g.Arrival, w.Arrival
		if !same(gd.Leverage, wd.Leverage) || !same(gd.Residual, wd.Residual) || !same(gd.StudentizedInternal, wd.StudentizedInternal) ||
			!same(gd.StudentizedExternal, wd.StudentizedExternal) || !same(gd.CooksDistance, wd.CooksDistance) ||
			!same(gd.DFFITS, wd.DFFITS) || !sameAll(gd.DFBETAS, wd.DFBETAS) || !same(gd.COVRATIO, wd.COVRATIO) ||
			!same(gd.OutlierPBonferroni, wd.OutlierPBonferroni) || gd.Verdict != wd.Verdict || len(gd.Flags) != len(wd.Flags) {
			t.Fatalf("observation %d diagnostics: got %+v, want %+v", i, gd, wd)
		}
		for k := range wd.Flags {
			if gd.Flags[k] != wd.Flags[k] {
				t.Fatalf("observation %d flag %d: got %+v, want %+v", i, k, gd.Flags[k], wd.Flags[k])
			}
		}
	}
}

// TestIngestAllocsPerRow bounds the garbage of committing a batch of 1,000
// judged p = 3 rows: the values are bound without an allocation each, so
// what remains is per statement and per batch.
func TestIngestAllocsPerRow(t *testing.T) {
	if testing.Short() {
		t.Skip("commits 20,000 rows")
	}
	db, _ := openTemp(t)
	ctx := context.Background()
	bt := newBatcher(1000)
	if _, err := db.Ingest(ctx, bt.next()); err != nil { // prepares the statements
		t.Fatal(err)
	}
	allocs := testing.AllocsPerRun(20, func() {
		if _, err := db.Ingest(ctx, bt.next()); err != nil {
			t.Fatal(err)
		}
	})
	perRow := allocs / 1000
	t.Logf("%.0f allocations per batch of 1,000 rows, %.3f per row", allocs, perRow)
	if perRow > 0.5 {
		t.Errorf("%.3f allocations per row, want at most 0.5", perRow)
	}
}
