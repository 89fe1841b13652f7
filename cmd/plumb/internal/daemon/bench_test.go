package daemon

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"plumb/cmd/plumb/internal/config"
	"plumb/store"
	"plumb/watcher"
	"plumb/watcher/decode"
)

// benchBatches decodes rows of a p = 3 model (y ~ x + x^2) into batches of
// size rows each, as the watcher would deliver them.
func benchBatches(tb testing.TB, model string, batches, size int) []watcher.Batch {
	tb.Helper()
	rng := rand.New(rand.NewPCG(5, 6))
	dec := decode.NewDecoder("feed.csv", decode.Dialect{Delimiter: ','})
	var out []watcher.Batch
	var buf strings.Builder
	buf.WriteString("id,x,y\n")
	for i := 0; i < batches*size; i++ {
		x := rng.Float64() * 10
		fmt.Fprintf(&buf, "%d,%.6g,%.6g\n", i, x, 1+0.5*x+0.02*x*x+0.1*rng.NormFloat64())
	}
	data := []byte(buf.String())
	if err := dec.Select([]string{"y", "x"}, nil); err != nil {
		tb.Fatal(err)
	}
	var recs []decode.Record
	if _, err := dec.Feed(data, true, func(r decode.Record) error {
		recs = append(recs, r)
		return nil
	}); err != nil {
		tb.Fatal(err)
	}
	n := len("id,x,y\n")
	off := int64(n)
	line := 1
	for b := 0; b < batches; b++ {
		rs := recs[b*size : (b+1)*size]
		end := rs[len(rs)-1]
		out = append(out, watcher.Batch{
			Model: model, Path: "feed.csv", Header: []string{"id", "x", "y"}, HeaderLine: 1,
			StartOffset: off, EndOffset: end.EndOffset, StartLine: line, EndLine: end.Line,
			Size: end.EndOffset, Records: rs,
		})
		off, line = end.EndOffset, end.Line
	}
	return out
}

// BenchmarkIngest measures sustained ingest for one model with p = 3:
// decoded rows judged on arrival by the online update and committed with
// their read position to SQLite, in batches as the watcher delivers them.
// It reports rows per wall-clock second and per CPU second.
func BenchmarkIngest(b *testing.B) {
	benchIngest(b, func(b *testing.B, dir, body string) *config.Config { return testConfig(b, dir, body) })
}

// benchIngest runs the ingest benchmark on the state that config makes.
func benchIngest(b *testing.B, mk func(b *testing.B, dir, body string) *config.Config) {
	for _, size := range []int{100, 1000, 10000} {
		b.Run(fmt.Sprintf("batch=%d", size), func(b *testing.B) {
			const total = 100_000
			batches := benchBatches(b, "m", total/size, size)
			b.ReportAllocs()
			var rows int
			var elapsed, cpu time.Duration
			for b.Loop() {
				b.StopTimer()
				dir := b.TempDir()
				c := mk(b, dir, `
[[model]]
name = "m"
folder = "in"
response = "y"
terms = ["x", "x^2"]
`)
				d, err := New(context.Background(), c, Options{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
				if err != nil {
					b.Fatal(err)
				}
				if d.leases != nil {
					// A shared store: own the model as Run would.
					d.leases.want(context.Background(), c)
					for !d.owns("m") {
						time.Sleep(time.Millisecond)
					}
					if err := d.build(context.Background(), c); err != nil {
						b.Fatal(err)
					}
				}
				s := sink{d}
				b.StartTimer()
				t0, c0 := time.Now(), processCPU()
				for _, bt := range batches {
					if err := s.Deliver(context.Background(), bt); err != nil {
						b.Fatal(err)
					}
				}
				elapsed += time.Since(t0)
				cpu += processCPU() - c0
				rows += total
				b.StopTimer()
				if d.leases != nil {
					d.leases.stop()
				}
				d.Close()
				b.StartTimer()
			}
			b.ReportMetric(float64(rows)/elapsed.Seconds(), "rows/s")
			// CPU seconds of the whole process (both cores): on a loaded
			// machine this shows the cost per row apart from waiting.
			b.ReportMetric(float64(rows)/cpu.Seconds(), "rows/cpu-s")
		})
	}
}

// TestMemoryPerObservation measures the resident memory a model holds per
// stored observation beyond its raw values (target: under 200 bytes).
func TestMemoryPerObservation(t *testing.T) {
	if testing.Short() {
		t.Skip("allocates 200,000 rows")
	}
	dir := t.TempDir()
	c := testConfig(t, dir, fmt.Sprintf(lineModel, "m", "in", false))
	d, err := New(context.Background(), c, Options{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	m := d.models["m"]
	const n = 200_000
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	m.mu.Lock()
	for i := 0; i < n; i++ {
		m.appendRow(int64(i+1), "feed.csv", i+2, "", 0, 0, []float64{float64(i), 1}, nil, "ordinary", "ordinary")
	}
	m.mu.Unlock()
	runtime.GC()
	runtime.ReadMemStats(&after)
	perRow := float64(after.HeapAlloc-before.HeapAlloc) / n
	raw := float64(len(m.rows.vals) * 8)
	beyond := perRow - raw
	t.Logf("heap per observation %.1f bytes, of which raw values %.0f, beyond them %.1f", perRow, raw, beyond)
	if beyond >= 200 {
		t.Errorf("%.1f bytes per observation beyond the raw values, want < 200", beyond)
	}
	runtime.KeepAlive(m)
}

// BenchmarkLatency measures the time from a line's newline being written
// to its verdict being stored, with a writer appending 1,000 rows/s through
// the real watcher. It reports the median and the 99th percentile.
func BenchmarkLatency(b *testing.B) {
	const rate = 1000
	const rows = 3000
	var all []float64
	for b.Loop() {
		b.StopTimer()
		dir := b.TempDir()
		c := testConfig(b, dir, `
[[model]]
name = "m"
folder = "in"
response = "y"
terms = ["x", "x^2"]
`)
		c.Watch.Debounce.Duration = 5 * time.Millisecond
		c.Watch.Refresh.Duration = time.Second
		if err := os.MkdirAll(filepath.Join(dir, "in"), 0o755); err != nil {
			b.Fatal(err)
		}
		f, err := os.Create(filepath.Join(dir, "in", "feed.csv"))
		if err != nil {
			b.Fatal(err)
		}
		fmt.Fprintln(f, "sent,x,y")
		r := start(b, c)
		rng := rand.New(rand.NewPCG(9, 9))
		b.StartTimer()
		tick := time.NewTicker(time.Second / rate)
		for i := 0; i < rows; i++ {
			<-tick.C
			x := rng.Float64() * 10
			fmt.Fprintf(f, "%d,%.6g,%.6g\n", time.Now().UnixNano(), x, 1+0.5*x+0.02*x*x+0.1*rng.NormFloat64())
		}
		tick.Stop()
		waitFor(b, "all rows", func() bool { return count(b, r.d.store, "m") == rows })
		b.StopTimer()
		obs, err := r.d.store.Observations(context.Background(), "m", store.ObsQuery{})
		if err != nil {
			b.Fatal(err)
		}
		for _, o := range obs {
			sent, err := strconv.ParseInt(strings.SplitN(o.Raw, ",", 2)[0], 10, 64)
			if err != nil {
				b.Fatal(err)
			}
			all = append(all, float64(o.ArrivedAt.UnixNano()-sent)/1e6)
		}
		r.stop(b)
		f.Close()
		b.StartTimer()
	}
	slices.Sort(all)
	b.ReportMetric(all[len(all)/2], "p50-ms")
	b.ReportMetric(all[len(all)*99/100], "p99-ms")
}

// BenchmarkManyModels feeds 100 models together (one folder each, rows
// appended round-robin in bursts) through the real watcher and reports
// the time until every model holds every row, and the spread between the
// first and the last model to finish: no model may starve.
func BenchmarkManyModels(b *testing.B) {
	const models, rows, bursts = 100, 1000, 10
	var total, spread []float64
	for b.Loop() {
		b.StopTimer()
		dir := b.TempDir()
		var body strings.Builder
		for i := 0; i < models; i++ {
			fmt.Fprintf(&body, lineModel, fmt.Sprintf("m%03d", i), fmt.Sprintf("in%03d", i), false)
			if err := os.MkdirAll(filepath.Join(dir, fmt.Sprintf("in%03d", i)), 0o755); err != nil {
				b.Fatal(err)
			}
		}
		c := testConfig(b, dir, body.String())
		r := start(b, c)
		rng := rand.New(rand.NewPCG(4, 4))
		b.StartTimer()
		t0 := time.Now()
		for k := 0; k < bursts; k++ {
			for i := 0; i < models; i++ {
				feed(b, filepath.Join(dir, fmt.Sprintf("in%03d", i), "f.csv"), rng, k*rows/bursts, rows/bursts, k == 0)
			}
		}
		done := make([]time.Duration, models)
		waitFor(b, "every model complete", func() bool {
			all := true
			for i := 0; i < models; i++ {
				if done[i] != 0 {
					continue
				}
				if count(b, r.d.store, fmt.Sprintf("m%03d", i)) == rows {
					done[i] = time.Since(t0)
				} else {
					all = false
				}
			}
			return all
		})
		b.StopTimer()
		slices.Sort(done)
		total = append(total, done[models-1].Seconds())
		spread = append(spread, (done[models-1] - done[0]).Seconds())
		r.stop(b)
		b.StartTimer()
	}
	slices.Sort(total)
	slices.Sort(spread)
	b.ReportMetric(total[len(total)/2], "s-all-done")
	b.ReportMetric(spread[len(spread)/2], "s-spread")
	b.ReportMetric(float64(models*rows)/total[len(total)/2], "rows/s")
}

// BenchmarkRefresh measures one refresh of a model holding 1,000,000 rows
// (p = 3, y ~ x + x^2, default fragility and suggestions): copying the
// window out of the columns, the analysis, the fit record with the
// verdicts that changed, and the alerts. Each iteration first marks one
// new row, as an ingest would. It reports the process's CPU time per
// refresh (both cores) beside the wall time, and with -benchmem the
// garbage per refresh. The rows are ingested once, outside the timer.
func BenchmarkRefresh(b *testing.B) {
	const total, size = 1_000_000, 10_000
	batches := benchBatches(b, "m", total/size+1, size)
	dir := b.TempDir()
	c := testConfig(b, dir, `
[[model]]
name = "m"
folder = "in"
response = "y"
terms = ["x", "x^2"]
`)
	d, err := New(context.Background(), c, Options{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		b.Fatal(err)
	}
	defer d.Close()
	s := sink{d}
	ctx := context.Background()
	for _, bt := range batches[:total/size] {
		if err := s.Deliver(ctx, bt); err != nil {
			b.Fatal(err)
		}
	}
	m := d.models["m"]
	if err := m.ref.refresh(ctx); err != nil { // the first fit stores every verdict
		b.Fatal(err)
	}
	// One more row per iteration: the last batch's rows, one at a time.
	extra := batches[total/size]
	next := func(k int) watcher.Batch {
		bt := extra
		bt.Records = extra.Records[k : k+1]
		if k > 0 {
			bt.StartOffset, bt.StartLine = extra.Records[k-1].EndOffset, extra.Records[k-1].Line
		}
		bt.EndOffset, bt.EndLine, bt.Size = extra.Records[k].EndOffset, extra.Records[k].Line, extra.Records[k].EndOffset
		return bt
	}
	b.ReportAllocs()
	var cpu time.Duration
	k := 0
	for b.Loop() {
		b.StopTimer()
		if err := s.Deliver(ctx, next(k)); err != nil {
			b.Fatal(err)
		}
		k++
		runtime.GC()
		b.StartTimer()
		c0 := processCPU()
		if err := m.ref.refresh(ctx); err != nil {
			b.Fatal(err)
		}
		cpu += processCPU() - c0
	}
	if got := m.ref.lastFitN; got != total+k {
		b.Fatalf("last fit of %d rows, want %d", got, total+k)
	}
	b.ReportMetric(cpu.Seconds()*1e3/float64(k), "cpu-ms/refresh")
}

// processCPU returns the user and system CPU time the process has used.
func processCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// TestIngestAllocsPerRow bounds the garbage of the whole ingest path (one
// model, p = 3, batches of 1,000 judged rows committed with their read
// position): the goal is at most 5 allocations a row; what is left is per
// batch and per statement.
func TestIngestAllocsPerRow(t *testing.T) {
	if testing.Short() {
		t.Skip("ingests 16,000 rows")
	}
	const size = 1000
	batches := benchBatches(t, "m", 16, size)
	dir := t.TempDir()
	c := testConfig(t, dir, `
[[model]]
name = "m"
folder = "in"
response = "y"
terms = ["x", "x^2"]
`)
	d, err := New(context.Background(), c, Options{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	s := sink{d}
	ctx := context.Background()
	for _, bt := range batches[:5] { // past min_rows: every later row is judged
		if err := s.Deliver(ctx, bt); err != nil {
			t.Fatal(err)
		}
	}
	next := 5
	allocs := testing.AllocsPerRun(10, func() {
		if err := s.Deliver(ctx, batches[next]); err != nil {
			t.Fatal(err)
		}
		next++
	})
	if got := count(t, d.store, "m"); got != int64(next*size) {
		t.Fatalf("%d rows stored, want %d", got, next*size)
	}
	perRow := allocs / size
	t.Logf("%.0f allocations per batch of %d rows, %.2f per row", allocs, size, perRow)
	if perRow > 5 {
		t.Errorf("%.2f allocations per row, want at most 5", perRow)
	}
}
