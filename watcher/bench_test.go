package watcher

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"sync/atomic"
	"testing"
)

// countSink counts good rows and closes done when it has want of them.
type countSink struct {
	rows atomic.Int64
	want int64
	done chan struct{}
}

func (s *countSink) Deliver(ctx context.Context, b Batch) error {
	n := 0
	for _, r := range b.Records {
		if r.Err == nil {
			n++
		}
	}
	if s.rows.Add(int64(n)) == s.want {
		close(s.done)
	}
	return nil
}
func (s *countSink) Notice(context.Context, Notice) {}

// BenchmarkBackfill reads a 100,000-row, 6-column file present at start
// through the whole watcher (scan, read, decode, deliver).
func BenchmarkBackfill(b *testing.B) {
	const rowsN = 100000
	dir := b.TempDir()
	var sb strings.Builder
	sb.WriteString("sample,temp_c,emf_mv,flow_lpm,drift,pressure_kpa\n")
	for i := range rowsN {
		fmt.Fprintf(&sb, "S%06d,%.3f,%.4f,%.2f,%.3e,%d\n", i, 20+float64(i%97)/100, 0.8+float64(i%4000)/100, float64(i%1200)/100, float64(i%13-6)*1e-5, 95+i%15)
	}
	name := filepath.Join(dir, "backlog.csv")
	if err := os.WriteFile(name, []byte(sb.String()), 0o644); err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(sb.Len()))
	b.ReportAllocs()
	for b.Loop() {
		sink := &countSink{want: rowsN, done: make(chan struct{})}
		cfg := Config{
			Sources:    []Source{{Model: "m", Folder: dir, Numeric: []string{"temp_c", "emf_mv", "flow_lpm", "drift", "pressure_kpa"}, Text: []string{"sample"}}},
			Rescan:     -1,
			NoProgress: true,
		}
		w, err := New(cfg, sink, nil)
		if err != nil {
			b.Fatal(err)
		}
		done := make(chan error, 1)
		go func() { done <- w.Run(context.Background()) }()
		select {
		case err := <-done:
			b.Fatal(err)
		case <-sink.done:
		}
		w.Close()
		if err := <-done; err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/rowsN, "ns/row")
}
