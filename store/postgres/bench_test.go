package postgres_test

import (
	"context"
	"fmt"
	"syscall"
	"testing"
	"time"

	"plumb/store"
)

// The benchmark rows are those of store/sqlite's BenchmarkIngest, so the
// two backends' figures compare directly.

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
			COVRATIO: 1.0123, OutlierPBonferroni: 1, Verdict: "ordinary",
		},
	}
}

// cpuTime returns the user and system CPU time used by the process (the
// server's own CPU time is not in it).
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
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
// diagnostics of one model to the server named by PLUMB_TEST_POSTGRES
// and reports rows/s (the server's settings decide what a commit waits
// for: synchronous_commit, fsync).
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
			b.ReportMetric(float64(rows)/b.Elapsed().Seconds(), "rows/s")
			if cpu := cpuTime() - cpu0; cpu > 0 {
				b.ReportMetric(float64(rows)/cpu.Seconds(), "rows/client-cpu-s")
			}
		})
	}
}
