package daemon

import (
	"context"
	"fmt"
	"io"
	"log/slog"
	"math/rand/v2"
	"slices"
	"strings"
	"syscall"
	"testing"
	"time"

	"plumb/watcher"
	"plumb/watcher/decode"
)

// BenchmarkRefreshFormChecks times a model's whole refresh (refit of
// n = 1e5 rows, p = 6, judgement, fragility, suggestions, the fit
// record) with and without the checks of the model form, alternately in
// one process (runs pairs, the order swapped every other pair), and
// reports the medians and the median paired ratio with/without.
// Run with -benchtime 1x.
func BenchmarkRefreshFormChecks(b *testing.B) {
	const n, size = 100_000, 10_000
	rng := rand.New(rand.NewPCG(16, 16))
	var buf strings.Builder
	buf.WriteString("x,z,y\n")
	for i := 0; i < n; i++ {
		x, z := rng.Float64()*10, rng.Float64()*5
		fmt.Fprintf(&buf, "%.6g,%.6g,%.6g\n", x, z, 1+0.5*x+0.02*x*x+0.3*z-0.01*z*z+0.05*x*z+0.1*rng.NormFloat64())
	}
	dec := decode.NewDecoder("feed.csv", decode.Dialect{Delimiter: ','})
	if err := dec.Select([]string{"y", "x", "z"}, nil); err != nil {
		b.Fatal(err)
	}
	var recs []decode.Record
	if _, err := dec.Feed([]byte(buf.String()), true, func(r decode.Record) error {
		recs = append(recs, r)
		return nil
	}); err != nil {
		b.Fatal(err)
	}
	c := testConfig(b, b.TempDir(), `
[[model]]
name = "m"
folder = "in"
response = "y"
terms = ["x", "x^2", "z", "z^2", "x*z"]
`)
	d, err := New(context.Background(), c, Options{Logger: slog.New(slog.NewTextHandler(io.Discard, nil))})
	if err != nil {
		b.Fatal(err)
	}
	defer d.Close()
	off, line := int64(len("x,z,y\n")), 1
	for k := 0; k < n/size; k++ {
		rs := recs[k*size : (k+1)*size]
		end := rs[len(rs)-1]
		bt := watcher.Batch{Model: "m", Path: "feed.csv", Header: []string{"x", "z", "y"}, HeaderLine: 1,
			StartOffset: off, EndOffset: end.EndOffset, StartLine: line, EndLine: end.Line, Size: end.EndOffset, Records: rs}
		if err := (sink{d}).Deliver(context.Background(), bt); err != nil {
			b.Fatal(err)
		}
		off, line = end.EndOffset, end.Line
	}
	m := d.models["m"]
	// Wall time and the process's CPU time (user + system, all
	// goroutines): on a shared machine the CPU time is the steadier.
	refresh := func(form bool) (wall, cpu time.Duration) {
		formInRefresh = form
		defer func() { formInRefresh = true }()
		m.mu.Lock()
		m.ref.dirty = true
		m.mu.Unlock()
		t0, c0 := time.Now(), cpuTime()
		if err := m.ref.refresh(context.Background()); err != nil {
			b.Fatal(err)
		}
		return time.Since(t0), cpuTime() - c0
	}
	refresh(true) // the first refresh stores every verdict
	const runs = 15
	median := func(v []float64) float64 { slices.Sort(v); return v[len(v)/2] }
	for b.Loop() {
		var with, without, ratio, cwith, cwithout, cratio []float64
		for k := 0; k < runs; k++ {
			var tw, to, cw, co time.Duration
			if k%2 == 0 {
				tw, cw = refresh(true)
				to, co = refresh(false)
			} else {
				to, co = refresh(false)
				tw, cw = refresh(true)
			}
			with, without, ratio = append(with, tw.Seconds()*1e3), append(without, to.Seconds()*1e3), append(ratio, float64(tw)/float64(to))
			cwith, cwithout, cratio = append(cwith, cw.Seconds()*1e3), append(cwithout, co.Seconds()*1e3), append(cratio, float64(cw)/float64(co))
		}
		b.ReportMetric(median(with), "with-ms")
		b.ReportMetric(median(without), "without-ms")
		b.ReportMetric(median(ratio), "ratio")
		b.ReportMetric(median(cwith), "cpu-with-ms")
		b.ReportMetric(median(cwithout), "cpu-without-ms")
		b.ReportMetric(median(cratio), "cpu-ratio")
	}
}

// cpuTime returns the process's user plus system CPU time.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
