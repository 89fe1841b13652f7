package sqlite_test

import (
	"context"
	"fmt"
	"os"
	"syscall"
	"testing"
	"time"

	"plumb/engine"
	"plumb/store"
)

// benchObs returns a p = 3 observation (response and two predictors) with
// arrival diagnostics, the shape the daemon stores for a judging model.
func benchObs(line int, at time.Time) store.Observation {
	x1, x2 := float64(line%97)*0.25, float64(line%13)
	y := 1.5 + 2*x1 - 0.5*x2
	return store.Observation{
		Line:      line,
		Raw:       fmt.Sprintf("2026-03-14T09:%02d:%02d,%.4f,%.2f,%.0f", line/60%60, line%60, y, x1, x2),
		Values:    []float64{y, x1, x2},
		Time:      at.Add(time.Duration(line) * time.Second),
		ArrivedAt: at.Add(time.Duration(line)*time.Second + time.Millisecond),
		Arrival: &store.Diagnostics{
			Leverage: 0.0123, Residual: -0.0456, StudentizedInternal: -0.789, StudentizedExternal: -0.788,
			CooksDistance: 0.00234, DFFITS: -0.0876, DFBETAS: []float64{0.01, -0.02, 0.03},
			COVRATIO: 1.0123, OutlierPBonferroni: 1, Verdict: engine.WordOrdinary, Flags: nil,
		},
	}
}

// cpuTime returns the user and system CPU time used by the process.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// reportRates reports rows per wall-clock second and rows per CPU second
// of the whole process since cpu0: on a shared, loaded machine the second
// shows the cost per row apart from waiting for a core.
func reportRates(b *testing.B, rows int, cpu0 time.Duration) {
	b.ReportMetric(float64(rows)/b.Elapsed().Seconds(), "rows/s")
	if cpu := cpuTime() - cpu0; cpu > 0 {
		b.ReportMetric(float64(rows)/cpu.Seconds(), "rows/cpu-s")
	}
}

// batcher hands out consecutive batches of n rows of one file.
type batcher struct {
	b    store.Batch
	line int
}

func newBatcher(n int) *batcher {
	at := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	bt := &batcher{line: 1}
	bt.b.Source = store.Source{Model: "bench", Path: "in/run.csv", Generation: 1, Header: "t\x1fy\x1fx1\x1fx2"}
	for i := range n {
		bt.b.Observations = append(bt.b.Observations, benchObs(i+2, at))
	}
	return bt
}

func (bt *batcher) next() store.Batch {
	for i := range bt.b.Observations {
		bt.line++
		bt.b.Observations[i].Line = bt.line
	}
	bt.b.Source.Line = bt.line
	bt.b.Source.Offset = int64(bt.line) * 40
	bt.b.Source.Size = bt.b.Source.Offset
	return bt.b
}

// BenchmarkIngest commits batches of p = 3 observations with arrival
// diagnostics to a file-backed database in WAL mode and reports rows/s.
func BenchmarkIngest(b *testing.B) {
	for _, n := range []int{1, 100, 1000, 10000} {
		b.Run(fmt.Sprintf("batch=%d", n), func(b *testing.B) {
			db, _ := openTemp(b)
			ctx := context.Background()
			bt := newBatcher(n)
			b.ReportAllocs()
			rows := 0
			cpu0 := cpuTime()
			for b.Loop() {
				if _, err := db.Ingest(ctx, bt.next()); err != nil {
					b.Fatal(err)
				}
				rows += n
			}
			reportRates(b, rows, cpu0)
		})
	}
}

// TestBytesPerObservation measures the database size per stored p = 3
// observation with arrival diagnostics (observations table and its
// indexes), after 100 refits that each changed a few verdicts, to show
// that storage grows with rows, not rows x fits.
func TestBytesPerObservation(t *testing.T) {
	if testing.Short() {
		t.Skip("writes 20,000 rows")
	}
	db, path := openTemp(t)
	ctx := context.Background()
	size := func() int64 {
		t.Helper()
		if _, err := db.DB().ExecContext(ctx, "PRAGMA wal_checkpoint(TRUNCATE)"); err != nil {
			t.Fatal(err)
		}
		st, err := os.Stat(path)
		if err != nil {
			t.Fatal(err)
		}
		return st.Size()
	}
	base := size()
	const n, per = 20000, 1000
	bt := newBatcher(per)
	var last []int64
	for range n / per {
		ids, err := db.Ingest(ctx, bt.next())
		if err != nil {
			t.Fatal(err)
		}
		last = ids
	}
	afterRows := size()
	const fits = 100
	for i := range fits {
		changes := []store.VerdictChange{
			{ObsID: last[i%len(last)], From: engine.WordOrdinary, To: engine.WordNotable, Flags: []engine.Flag{{Measure: engine.MeasureLeverage}}},
			{ObsID: last[(i+1)%len(last)], From: engine.WordNotable, To: engine.WordOrdinary, Flags: nil},
		}
		f := store.FitRecord{Model: "bench", At: time.Now(), N: n, P: 3, Terms: []string{"intercept", "x1", "x2"},
			Estimates: []float64{1.5, 2, -0.5}, StdErrors: []float64{0.01, 0.02, 0.03}, Sigma: 0.1, RSquared: 0.99,
			Fragility: -1, FragilityK: 3, Detail: `{"max_cooks":0.01}`, LastObsID: last[len(last)-1]}
		if _, err := db.RecordFit(ctx, f, changes); err != nil {
			t.Fatal(err)
		}
	}
	afterFits := size()
	perObs := float64(afterRows-base) / n
	perFit := float64(afterFits-afterRows) / fits
	t.Logf("%.1f bytes per observation (p = 3, with arrival diagnostics, raw line %d bytes); %.0f bytes per refit with 2 verdict changes",
		perObs, len(bt.b.Observations[0].Raw), perFit)
	// Bound from the row layout: raw text, three 24-byte float blobs' worth
	// of values and DFBETAS, eight REAL diagnostics, two times, provenance
	// and two index entries come to about 200 bytes; allow page slack.
	if perObs > 300 {
		t.Errorf("%.1f bytes per observation, want <= 300", perObs)
	}
	if perFit > 2000 {
		t.Errorf("%.0f bytes per refit, want <= 2000 (a refit must not rewrite observations)", perFit)
	}
}

// BenchmarkObservations reads a model's rows back in pages, as the daemon
// does when it restores a model at start-up, and reports rows/s.
func BenchmarkObservations(b *testing.B) {
	const total = 50000
	for _, page := range []int{1000, 50000} {
		b.Run(fmt.Sprintf("page=%d", page), func(b *testing.B) {
			db, _ := openTemp(b)
			ctx := context.Background()
			bt := newBatcher(10000)
			for range total / 10000 {
				if _, err := db.Ingest(ctx, bt.next()); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportAllocs()
			rows := 0
			cpu0 := cpuTime()
			for b.Loop() {
				var after int64
				for {
					obs, err := db.Observations(ctx, "bench", store.ObsQuery{AfterID: after, Limit: page})
					if err != nil {
						b.Fatal(err)
					}
					rows += len(obs)
					if len(obs) < page {
						break
					}
					after = obs[len(obs)-1].ID
				}
			}
			reportRates(b, rows, cpu0)
		})
	}
}

// BenchmarkRecordFit stores a fit summary with 10 verdict changes.
func BenchmarkRecordFit(b *testing.B) {
	db, _ := openTemp(b)
	ctx := context.Background()
	ids, err := db.Ingest(ctx, newBatcher(1000).next())
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		changes := make([]store.VerdictChange, 10)
		for j := range changes {
			changes[j] = store.VerdictChange{ObsID: ids[(i*10+j)%len(ids)], From: engine.WordOrdinary, To: engine.WordNotable, Flags: nil}
		}
		f := store.FitRecord{Model: "bench", At: time.Now(), N: 1000, P: 3, Terms: []string{"intercept", "x1", "x2"},
			Estimates: []float64{1.5, 2, -0.5}, StdErrors: []float64{0.01, 0.02, 0.03}, Sigma: 0.1, RSquared: 0.99,
			Fragility: -1, FragilityK: 3, Detail: `{"max_cooks":0.01}`, LastObsID: ids[len(ids)-1]}
		if _, err := db.RecordFit(ctx, f, changes); err != nil {
			b.Fatal(err)
		}
		i++
	}
}

// BenchmarkLatestFits reads the latest 300 fits of a model (what the
// dashboard and the report chart) from histories of two sizes: with
// LatestFits the cost stays flat, while paging through Fits, as a reader
// without LatestFits must, grows with the history.
func BenchmarkLatestFits(b *testing.B) {
	const keep = 300
	for _, total := range []int{1000, 20000} {
		db, _ := openTemp(b)
		ctx := context.Background()
		ids, err := db.Ingest(ctx, newBatcher(10).next())
		if err != nil {
			b.Fatal(err)
		}
		at := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
		for i := range total {
			for _, model := range []string{"bench", "other"} { // two models share the table
				f := store.FitRecord{Model: model, At: at.Add(time.Duration(i) * time.Second), N: 1000, P: 3,
					Terms: []string{"intercept", "x1", "x2"}, Estimates: []float64{1.5, 2, -0.5}, StdErrors: []float64{0.01, 0.02, 0.03},
					Sigma: 0.1, RSquared: 0.99, Fragility: -1, FragilityK: 3, Detail: `{"max_cooks_distance":0.01}`, LastObsID: ids[len(ids)-1]}
				if _, err := db.RecordFit(ctx, f, nil); err != nil {
					b.Fatal(err)
				}
			}
		}
		b.Run(fmt.Sprintf("history=%d/latest", total), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				fs, err := db.LatestFits(ctx, "bench", keep)
				if err != nil || len(fs) != keep {
					b.Fatalf("LatestFits = %d fits, %v", len(fs), err)
				}
			}
		})
		b.Run(fmt.Sprintf("history=%d/paged", total), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				var kept []store.FitRecord
				var after int64
				for {
					page, err := db.Fits(ctx, "bench", after, 1000)
					if err != nil {
						b.Fatal(err)
					}
					kept = append(kept, page...)
					if len(kept) > keep {
						kept = kept[len(kept)-keep:]
					}
					if len(page) < 1000 {
						break
					}
					after = page[len(page)-1].ID
				}
				if len(kept) != keep {
					b.Fatalf("paged: %d fits", len(kept))
				}
			}
		})
	}
}
