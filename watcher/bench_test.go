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

// BenchmarkSameOldPart is the cost of telling a file saved anew by rename
// from a different one: one read and SHA-256 of the part already read,
// here 100 MB (from the page cache: the file was just written).
func BenchmarkSameOldPart(b *testing.B) {
	const size = 100 << 20
	name := filepath.Join(b.TempDir(), "big.csv")
	line := []byte("123456,21.375,0.84113,12.5,0.0001,101.325\n")
	buf := make([]byte, 0, size+len(line))
	for len(buf) < size {
		buf = append(buf, line...)
	}
	buf = buf[:size]
	if err := os.WriteFile(name, buf, 0o644); err != nil {
		b.Fatal(err)
	}
	f, err := os.Open(name)
	if err != nil {
		b.Fatal(err)
	}
	defer f.Close()
	st := FileState{Offset: size}
	h, err := resumeDigest(st, f) // the digest as it would have been saved
	if err != nil {
		b.Fatal(err)
	}
	if st.Digest, err = h.(interface{ MarshalBinary() ([]byte, error) }).MarshalBinary(); err != nil {
		b.Fatal(err)
	}
	b.SetBytes(size)
	b.ResetTimer()
	for b.Loop() {
		same, why, err := sameOldPart(st, f, size)
		if err != nil || !same {
			b.Fatal(same, why, err)
		}
	}
}
