package watcher

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/fsnotify/fsnotify"
	"golang.org/x/term"

	"plumb/watcher/decode"
)

// fakeSink is an in-memory Sink that checks the exactly-once contract:
// every batch must start where the last accepted one of the same
// (model, path, generation) ended, and a new generation must start at 0.
type fakeSink struct {
	t  testing.TB
	mu sync.Mutex
	// fail, if set, decides whether a Deliver fails (before storing).
	fail func(Batch) error

	state    map[string]FileState       // model \x00 path -> committed
	rows     map[string][]decode.Record // model \x00 path \x00 gen -> records
	batches  int
	failures int
	notices  []Notice
}

func newFakeSink(t testing.TB) *fakeSink {
	return &fakeSink{t: t, state: map[string]FileState{}, rows: map[string][]decode.Record{}}
}

func (s *fakeSink) Deliver(ctx context.Context, b Batch) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.fail != nil {
		if err := s.fail(b); err != nil {
			s.failures++
			return err
		}
	}
	key := b.Model + "\x00" + b.Path
	old, ok := s.state[key]
	switch {
	case ok && b.Generation == old.Generation:
		if b.StartOffset != old.Offset || b.StartLine != old.Line {
			s.t.Errorf("%s gen %d: batch starts at %d/%d, committed %d/%d", b.Path, b.Generation, b.StartOffset, b.StartLine, old.Offset, old.Line)
		}
	case ok && b.Generation < old.Generation:
		s.t.Errorf("%s: generation went back from %d to %d", b.Path, old.Generation, b.Generation)
	case b.StartOffset != 0 && !(ok && b.Generation == old.Generation):
		// A first batch not at 0 is only right for a moved file.
		moved := false
		for _, n := range s.notices {
			if n.Kind == Moved && n.Path == b.Path {
				moved = true
			}
		}
		if !moved {
			s.t.Errorf("%s gen %d: first batch starts at %d", b.Path, b.Generation, b.StartOffset)
		}
	}
	if b.EndOffset < b.StartOffset || b.EndLine < b.StartLine {
		s.t.Errorf("%s: batch goes backwards %d->%d", b.Path, b.StartOffset, b.EndOffset)
	}
	prev := b.StartOffset
	for _, r := range b.Records {
		if r.EndOffset <= prev || r.EndOffset > b.EndOffset {
			s.t.Errorf("%s: record line %d ends at %d outside (%d, %d]", b.Path, r.Line, r.EndOffset, prev, b.EndOffset)
		}
		prev = r.EndOffset
	}
	s.state[key] = b.State()
	gk := fmt.Sprintf("%s\x00%d", key, b.Generation)
	s.rows[gk] = append(s.rows[gk], b.Records...)
	s.batches++
	return nil
}

func (s *fakeSink) Notice(ctx context.Context, n Notice) {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.notices = append(s.notices, n)
}

// values returns the first value of each good row of (model, path, gen).
func (s *fakeSink) values(model, path string, gen int) []float64 {
	s.mu.Lock()
	defer s.mu.Unlock()
	var v []float64
	for _, r := range s.rows[fmt.Sprintf("%s\x00%s\x00%d", model, path, gen)] {
		if r.Err == nil {
			v = append(v, r.Values[0])
		}
	}
	return v
}

func (s *fakeSink) records(model, path string, gen int) []decode.Record {
	s.mu.Lock()
	defer s.mu.Unlock()
	return slices.Clone(s.rows[fmt.Sprintf("%s\x00%s\x00%d", model, path, gen)])
}

func (s *fakeSink) noticesOf(kind NoticeKind) []Notice {
	s.mu.Lock()
	defer s.mu.Unlock()
	var out []Notice
	for _, n := range s.notices {
		if n.Kind == kind {
			out = append(out, n)
		}
	}
	return out
}

func (s *fakeSink) committed(model, path string) (FileState, bool) {
	s.mu.Lock()
	defer s.mu.Unlock()
	st, ok := s.state[model+"\x00"+path]
	return st, ok
}

// testConfig is a fast configuration for one model "m" on dir.
func testConfig(dir string) Config {
	return Config{
		Sources:    []Source{{Model: "m", Folder: dir, Numeric: []string{"x", "y"}}},
		Debounce:   10 * time.Millisecond,
		IdleFlush:  300 * time.Millisecond,
		Rescan:     -1,
		RetryMin:   5 * time.Millisecond,
		RetryMax:   40 * time.Millisecond,
		NoProgress: true,
	}
}

// start runs a watcher until the test ends.
func start(tb testing.TB, cfg Config, sink Sink) *Watcher {
	tb.Helper()
	w, err := New(cfg, sink, nil)
	if err != nil {
		tb.Fatal(err)
	}
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background()) }()
	tb.Cleanup(func() {
		if err := w.Close(); err != nil {
			tb.Errorf("Close: %v", err)
		}
		if err := <-errc; err != nil {
			tb.Errorf("Run: %v", err)
		}
	})
	return w
}

// waitFor polls cond until it holds or the timeout passes.
func waitFor(tb testing.TB, what string, timeout time.Duration, cond func() bool) {
	tb.Helper()
	deadline := time.Now().Add(timeout)
	for !cond() {
		if time.Now().After(deadline) {
			tb.Fatalf("timed out waiting for %s", what)
		}
		time.Sleep(5 * time.Millisecond)
	}
}

func writeFile(tb testing.TB, name, content string) {
	tb.Helper()
	if err := os.MkdirAll(filepath.Dir(name), 0o755); err != nil {
		tb.Fatal(err)
	}
	if err := os.WriteFile(name, []byte(content), 0o644); err != nil {
		tb.Fatal(err)
	}
}

func appendFile(tb testing.TB, name, content string) {
	tb.Helper()
	f, err := os.OpenFile(name, os.O_WRONLY|os.O_APPEND, 0)
	if err != nil {
		tb.Fatal(err)
	}
	if _, err := f.WriteString(content); err != nil {
		tb.Fatal(err)
	}
	if err := f.Close(); err != nil {
		tb.Fatal(err)
	}
}

func seq(from, to int) []float64 {
	var v []float64
	for i := from; i <= to; i++ {
		v = append(v, float64(i))
	}
	return v
}

func rows(from, to int) string {
	var b strings.Builder
	for i := from; i <= to; i++ {
		fmt.Fprintf(&b, "%d,%d\n", i, 2*i)
	}
	return b.String()
}

const waitLong = 5 * time.Second

func TestBackfillThenAppend(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n"+rows(1, 50))
	writeFile(t, filepath.Join(dir, "b.csv"), "x,y\n"+rows(1, 3))
	writeFile(t, filepath.Join(dir, "notes.txt"), "not a csv\n")
	before, _ := os.ReadFile(a)
	var mu sync.Mutex
	var last Progress
	cfg := testConfig(dir)
	cfg.NoProgress = false
	cfg.Progress = func(p Progress) { mu.Lock(); last = p; mu.Unlock() }
	sink := newFakeSink(t)
	start(t, cfg, sink)
	waitFor(t, "backfill", waitLong, func() bool {
		return len(sink.values("m", "a.csv", 0)) == 50 && len(sink.values("m", "b.csv", 0)) == 3
	})
	waitFor(t, "progress done", waitLong, func() bool { mu.Lock(); defer mu.Unlock(); return last.Done })
	mu.Lock()
	if last.Files != 2 || last.FilesDone != 2 || last.BytesDone != last.Bytes || last.Bytes == 0 {
		t.Errorf("progress %+v", last)
	}
	mu.Unlock()
	// A slow writer appends one line at a time.
	for i := 51; i <= 60; i++ {
		appendFile(t, a, rows(i, i))
		time.Sleep(3 * time.Millisecond)
	}
	waitFor(t, "appends", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 60 })
	if got := sink.values("m", "a.csv", 0); !slices.Equal(got, seq(1, 60)) {
		t.Errorf("rows %v", got)
	}
	recs := sink.records("m", "a.csv", 0)
	if recs[0].Line != 2 || recs[59].Line != 61 || recs[59].Raw != "60,120" {
		t.Errorf("provenance: first line %d, last line %d %q", recs[0].Line, recs[59].Line, recs[59].Raw)
	}
	after, _ := os.ReadFile(a)
	if !strings.HasPrefix(string(after), string(before)) {
		t.Error("source file was modified")
	}
	st, _ := sink.committed("m", "a.csv")
	fi, _ := os.Stat(a)
	if st.Offset != fi.Size() || st.Line != 61 || int64(st.FingerprintLen) != min(fi.Size(), FingerprintBytes) || !slices.Equal(st.Header, []string{"x", "y"}) {
		t.Errorf("committed state %+v (size %d)", st, fi.Size())
	}
}

func TestPartialLastLineAndIdleFlush(t *testing.T) {
	const idle = 1500 * time.Millisecond
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n1,2\n2,")
	cfg := testConfig(dir)
	cfg.IdleFlush = idle
	sink := newFakeSink(t)
	start(t, cfg, sink)
	waitFor(t, "first row", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 1 })
	time.Sleep(100 * time.Millisecond) // less than IdleFlush
	if n := len(sink.records("m", "a.csv", 0)); n != 1 {
		t.Fatalf("partial line consumed early: %d records", n)
	}
	// The write completing the line is read at once (one debounce window),
	// not when the idle timer of the partial line would fire.
	appended := time.Now()
	appendFile(t, a, "4\n3,6")
	waitFor(t, "completed line", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 2 })
	if el := time.Since(appended); el > idle/2 {
		t.Errorf("completed line read %v after the write, want about one debounce window", el)
	}
	// "3,6" has no newline: after IdleFlush without change it is taken,
	// not before (the tail cannot have been seen before the append).
	waitFor(t, "idle flush", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 3 })
	if el := time.Since(appended); el < idle {
		t.Errorf("idle flush %v after the append, want at least IdleFlush (%v)", el, idle)
	}
	if got := sink.values("m", "a.csv", 0); !slices.Equal(got, []float64{1, 2, 3}) {
		t.Errorf("rows %v", got)
	}
}

func TestAtomicRenameIn(t *testing.T) {
	dir, outside := t.TempDir(), t.TempDir()
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	tmp := filepath.Join(outside, "run.csv")
	writeFile(t, tmp, "x,y\n"+rows(1, 5))
	if err := os.Rename(tmp, filepath.Join(dir, "run.csv")); err != nil {
		t.Fatal(err)
	}
	// Also a temporary dot-file renamed within the folder.
	dot := filepath.Join(dir, ".run2.csv.part")
	writeFile(t, dot, "x,y\n"+rows(7, 8))
	if err := os.Rename(dot, filepath.Join(dir, "run2.csv")); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "renamed files", waitLong, func() bool {
		return len(sink.values("m", "run.csv", 0)) == 5 && len(sink.values("m", "run2.csv", 0)) == 2
	})
}

func TestNewSubfolder(t *testing.T) {
	dir := t.TempDir()
	cfg := testConfig(dir)
	cfg.Sources[0].Recursive = true
	sink := newFakeSink(t)
	start(t, cfg, sink)
	time.Sleep(20 * time.Millisecond)
	// Files written right after mkdir, before the watch exists.
	writeFile(t, filepath.Join(dir, "day1", "a.csv"), "x,y\n"+rows(1, 4))
	writeFile(t, filepath.Join(dir, "day1", "deeper", "b.csv"), "x,y\n"+rows(1, 2))
	waitFor(t, "files in new folders", waitLong, func() bool {
		return len(sink.values("m", "day1/a.csv", 0)) == 4 && len(sink.values("m", "day1/deeper/b.csv", 0)) == 2
	})
	appendFile(t, filepath.Join(dir, "day1", "deeper", "b.csv"), rows(3, 3))
	waitFor(t, "append in new folder", waitLong, func() bool { return len(sink.values("m", "day1/deeper/b.csv", 0)) == 3 })
}

// watchFirst writes a.csv with rows 1..n in a new folder, starts a watcher
// on it and waits until those n rows have arrived as generation 0.
func watchFirst(t *testing.T, n int) (dir, a string, sink *fakeSink) {
	t.Helper()
	dir = t.TempDir()
	a = filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n"+rows(1, n))
	sink = newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "generation 0", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == n })
	return dir, a, sink
}

func TestTruncationAndRewrite(t *testing.T) {
	_, a, sink := watchFirst(t, 5)
	// O_TRUNC rewrite, shorter: only a Write event.
	writeFile(t, a, "x,y\n"+rows(100, 101))
	waitFor(t, "gen 1", waitLong, func() bool { return len(sink.values("m", "a.csv", 1)) == 2 })
	if n := sink.noticesOf(Truncated); len(n) != 1 || n[0].Generation != 1 {
		t.Errorf("truncation notices %+v", n)
	}
	// Rewrite in place to a longer file with different first bytes.
	writeFile(t, a, "x,y\n"+rows(200, 210))
	waitFor(t, "gen 2", waitLong, func() bool { return len(sink.values("m", "a.csv", 2)) == 11 })
	if got := sink.values("m", "a.csv", 0); !slices.Equal(got, seq(1, 5)) {
		t.Errorf("old rows changed: %v", got)
	}
	if got := sink.values("m", "a.csv", 1); !slices.Equal(got, []float64{100, 101}) {
		t.Errorf("gen 1 rows %v", got)
	}
}

func TestRotation(t *testing.T) {
	_, a, sink := watchFirst(t, 3)
	appendFile(t, a, rows(4, 4))
	if err := os.Rename(a, a+".1"); err != nil { // not matched by *.csv
		t.Fatal(err)
	}
	writeFile(t, a, "x,y\n"+rows(10, 12))
	waitFor(t, "gen 1", waitLong, func() bool { return len(sink.values("m", "a.csv", 1)) == 3 })
	if n := sink.noticesOf(Rotated); len(n) != 1 {
		t.Errorf("rotation notices %+v", n)
	}
	if got := sink.values("m", "a.csv", 1); !slices.Equal(got, seq(10, 12)) {
		t.Errorf("gen 1 rows %v", got)
	}
}

func TestRenameWithinFolderIsNotReadTwice(t *testing.T) {
	dir, a, sink := watchFirst(t, 4)
	b := filepath.Join(dir, "a-2026.csv")
	if err := os.Rename(a, b); err != nil {
		t.Fatal(err)
	}
	appendFile(t, b, rows(5, 6))
	waitFor(t, "b continues", waitLong, func() bool { return len(sink.values("m", "a-2026.csv", 0)) == 2 })
	time.Sleep(50 * time.Millisecond)
	if got := sink.values("m", "a-2026.csv", 0); !slices.Equal(got, []float64{5, 6}) {
		t.Errorf("renamed file rows %v, want only the new ones", got)
	}
	if len(sink.noticesOf(Moved)) != 1 || len(sink.noticesOf(Deleted)) != 1 {
		t.Errorf("notices %+v", sink.notices)
	}
}

func TestHeaderChangeBlocks(t *testing.T) {
	_, a, sink := watchFirst(t, 3)
	writeFile(t, a, "y,x\n"+rows(1, 9))
	waitFor(t, "header notice", waitLong, func() bool { return len(sink.noticesOf(HeaderChanged)) == 1 })
	appendFile(t, a, rows(10, 11)) // still blocked, no repeated notice
	time.Sleep(100 * time.Millisecond)
	if n := len(sink.records("m", "a.csv", 1)); n != 0 {
		t.Errorf("%d rows read from a file whose header changed", n)
	}
	if n := sink.noticesOf(HeaderChanged); len(n) != 1 || !strings.Contains(n[0].Detail, `["y", "x"]`) {
		t.Errorf("header notices %+v", n)
	}
	// Restoring the header unblocks it.
	writeFile(t, a, "x,y\n"+rows(20, 21))
	waitFor(t, "unblocked", waitLong, func() bool { return len(sink.values("m", "a.csv", 1)) == 2 })
}

func TestDeleted(t *testing.T) {
	_, a, sink := watchFirst(t, 3)
	if err := os.Remove(a); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "deleted notice", waitLong, func() bool { return len(sink.noticesOf(Deleted)) == 1 })
	if got := sink.values("m", "a.csv", 0); len(got) != 3 {
		t.Errorf("history changed: %v", got)
	}
	// The same name again is a new generation.
	writeFile(t, a, "x,y\n"+rows(7, 7))
	waitFor(t, "reappeared", waitLong, func() bool { return len(sink.values("m", "a.csv", 1)) == 1 })
}

func TestSymlinks(t *testing.T) {
	dir, outside := t.TempDir(), t.TempDir()
	secret := filepath.Join(outside, "secret.csv")
	writeFile(t, secret, "x,y\n"+rows(1, 2))
	inner := filepath.Join(dir, "real.csv")
	writeFile(t, inner, "x,y\n"+rows(5, 6))
	hidden := filepath.Join(dir, "raw", "export.txt") // not matched itself
	writeFile(t, hidden, "x,y\n"+rows(8, 8))
	if err := os.Symlink(hidden, filepath.Join(dir, "export.csv")); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(secret, filepath.Join(dir, "out.csv")); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(inner, filepath.Join(dir, "alias.csv")); err != nil {
		t.Fatal(err)
	}
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "inner files", waitLong, func() bool {
		return len(sink.values("m", "real.csv", 0)) == 2 && len(sink.values("m", "export.csv", 0)) == 1
	})
	waitFor(t, "symlink notices", waitLong, func() bool { return len(sink.noticesOf(Symlink)) == 2 })
	if n := sink.records("m", "out.csv", 0); len(n) != 0 {
		t.Errorf("read %d rows through a link leading outside", len(n))
	}
	if n := sink.records("m", "alias.csv", 0); len(n) != 0 {
		t.Errorf("read %d rows twice through a link to a watched file", len(n))
	}
	for _, n := range sink.noticesOf(Symlink) {
		switch n.Path {
		case "out.csv":
			if !strings.Contains(n.Detail, "outside") {
				t.Errorf("notice %+v", n)
			}
		case "alias.csv":
			if !strings.Contains(n.Detail, "own name") {
				t.Errorf("notice %+v", n)
			}
		default:
			t.Errorf("unexpected notice %+v", n)
		}
	}
}

func TestResumeFromState(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	content := "x,y\n" + rows(1, 6)
	writeFile(t, a, content)
	// Run once, stop, then resume with the committed state.
	sink := newFakeSink(t)
	w, err := New(testConfig(dir), sink, nil)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error)
	go func() { done <- w.Run(ctx) }()
	waitFor(t, "first run", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 6 })
	cancel()
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	w.Close()
	st, _ := sink.committed("m", "a.csv")
	appendFile(t, a, rows(7, 9))
	cfg := testConfig(dir)
	cfg.Sources[0].States = []FileState{st}
	sink2 := newFakeSink(t)
	sink2.state["m\x00a.csv"] = st
	start(t, cfg, sink2)
	waitFor(t, "resumed", waitLong, func() bool { return len(sink2.values("m", "a.csv", 0)) == 3 })
	recs := sink2.records("m", "a.csv", 0)
	if recs[0].Line != 8 || recs[0].Values[0] != 7 {
		t.Errorf("resumed at line %d value %v", recs[0].Line, recs[0].Values)
	}
}

// TestDeliverErrorsRetry fails most deliveries while a writer appends; the
// fake sink checks every batch continues the last accepted one, and in
// the end every row is there once, in order.
func TestDeliverErrorsRetry(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n"+rows(1, 100))
	sink := newFakeSink(t)
	n := 0
	sink.fail = func(b Batch) error {
		n++
		if n%3 != 0 {
			return errors.New("database is locked")
		}
		return nil
	}
	cfg := testConfig(dir)
	cfg.MaxBatchBytes = 64 // many small batches
	start(t, cfg, sink)
	for i := 101; i <= 300; i += 10 {
		appendFile(t, a, rows(i, i+9))
		time.Sleep(2 * time.Millisecond)
	}
	waitFor(t, "all rows", 4*waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) >= 300 })
	time.Sleep(50 * time.Millisecond)
	if got := sink.values("m", "a.csv", 0); !slices.Equal(got, seq(1, 300)) {
		t.Errorf("got %d rows, first differences: %v", len(got), firstDiff(got, seq(1, 300)))
	}
	sink.mu.Lock()
	defer sink.mu.Unlock()
	if sink.failures == 0 {
		t.Error("no delivery failed: the test did not test retry")
	}
}

func firstDiff(a, b []float64) string {
	for i := range min(len(a), len(b)) {
		if a[i] != b[i] {
			return fmt.Sprintf("at %d: %v vs %v", i, a[i], b[i])
		}
	}
	return fmt.Sprintf("lengths %d vs %d", len(a), len(b))
}

// TestEventStorm appends 10,000 lines one write each; the reads are
// coalesced into far fewer batches than lines.
func TestEventStorm(t *testing.T) {
	if testing.Short() {
		t.Skip("storm")
	}
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n")
	sink := newFakeSink(t)
	cfg := testConfig(dir)
	cfg.Debounce = 50 * time.Millisecond
	start(t, cfg, sink)
	f, err := os.OpenFile(a, os.O_WRONLY|os.O_APPEND, 0)
	if err != nil {
		t.Fatal(err)
	}
	for i := 1; i <= 10000; i++ {
		if _, err := fmt.Fprintf(f, "%d,%d\n", i, i); err != nil {
			t.Fatal(err)
		}
	}
	f.Close()
	waitFor(t, "storm rows", 4*waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 10000 })
	if got := sink.values("m", "a.csv", 0); !slices.Equal(got, seq(1, 10000)) {
		t.Error("rows out of order or doubled")
	}
	sink.mu.Lock()
	defer sink.mu.Unlock()
	if sink.batches > 200 {
		t.Errorf("%d batches for 10000 appended lines: events not coalesced", sink.batches)
	}
}

func TestSeveralModelsSameFiles(t *testing.T) {
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "a.csv"), "x,y\n"+rows(1, 3))
	cfg := testConfig(dir)
	cfg.Sources = append(cfg.Sources, Source{Model: "m2", Folder: dir, Numeric: []string{"y"}})
	sink := newFakeSink(t)
	start(t, cfg, sink)
	waitFor(t, "both models", waitLong, func() bool {
		return len(sink.values("m", "a.csv", 0)) == 3 && len(sink.values("m2", "a.csv", 0)) == 3
	})
	if got := sink.values("m2", "a.csv", 0); !slices.Equal(got, []float64{2, 4, 6}) {
		t.Errorf("m2 rows %v", got)
	}
}

func TestBadRowsAndColumnErrors(t *testing.T) {
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "bad.csv"), "x,y\n1,2\n3,oops\n4\n5,6\n")
	writeFile(t, filepath.Join(dir, "typo.csv"), "x,Y\n1,2\n")
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "bad rows", waitLong, func() bool { return len(sink.records("m", "bad.csv", 0)) == 4 })
	recs := sink.records("m", "bad.csv", 0)
	if !errors.Is(recs[1].Err, decode.ErrNotNumber) || !errors.Is(recs[2].Err, decode.ErrFieldCount) || recs[1].Err.Line != 3 {
		t.Errorf("bad rows %v / %v", recs[1].Err, recs[2].Err)
	}
	waitFor(t, "column error", waitLong, func() bool { return len(sink.noticesOf(Error)) == 1 })
	n := sink.noticesOf(Error)[0]
	var ce *decode.ColumnError
	if n.Path != "typo.csv" || !n.Blocked || !errors.As(n.Err, &ce) || ce.Name != "y" {
		t.Errorf("notice %+v", n)
	}
}

func TestRescanFindsMissedFiles(t *testing.T) {
	dir := t.TempDir()
	cfg := testConfig(dir)
	cfg.Rescan = 100 * time.Millisecond
	sink := newFakeSink(t)
	w := start(t, cfg, sink)
	time.Sleep(20 * time.Millisecond)
	// Drop the kernel watch so no event comes: only the rescan can see it.
	if err := w.fsw.Remove(w.srcs[0].abs); err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(dir, "late.csv"), "x,y\n"+rows(1, 2))
	waitFor(t, "rescan", waitLong, func() bool { return len(sink.values("m", "late.csv", 0)) == 2 })
}

func TestOverflowRescans(t *testing.T) {
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "a.csv"), "x,y\n"+rows(1, 2))
	sink := newFakeSink(t)
	w, err := New(testConfig(dir), sink, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	w.onError(context.Background(), fsnotify.ErrEventOverflow)
	if len(sink.noticesOf(Overflow)) != 1 {
		t.Errorf("no overflow notice")
	}
	if w.pend.len() != 1 {
		t.Errorf("%d files pending after overflow, want 1", w.pend.len())
	}
	w.flush(context.Background()) // nothing due yet (debounce)
	time.Sleep(cfgDebounce(w))
	w.flush(context.Background())
	if got := sink.values("m", "a.csv", 0); len(got) != 2 {
		t.Errorf("rows after overflow rescan: %v", got)
	}
}

func cfgDebounce(w *Watcher) time.Duration { return w.cfg.Debounce + 5*time.Millisecond }

func TestNewRejectsBadConfig(t *testing.T) {
	dir := t.TempDir()
	sink := newFakeSink(t)
	bad := []Config{
		{},
		{Sources: []Source{{Folder: dir}}},
		{Sources: []Source{{Model: "m", Folder: filepath.Join(dir, "missing")}}},
		{Sources: []Source{{Model: "m", Folder: dir, Pattern: "[x"}}},
		{Sources: []Source{{Model: "m", Folder: dir, Dialect: decode.Dialect{DecimalComma: true}}}},
		{Sources: []Source{{Model: "m", Folder: dir}, {Model: "m", Folder: dir}}},
	}
	for i, cfg := range bad {
		if _, err := New(cfg, sink, nil); !errors.Is(err, ErrConfig) {
			t.Errorf("config %d: err = %v, want ErrConfig", i, err)
		}
	}
}

func TestHugeLineIsRefusedAndSkipped(t *testing.T) {
	if testing.Short() {
		t.Skip("10 MB file")
	}
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n1,2\n3,"+strings.Repeat("4", 10<<20)+"\n5,6\n")
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "rows around the huge line", 4*waitLong, func() bool { return len(sink.records("m", "a.csv", 0)) == 3 })
	recs := sink.records("m", "a.csv", 0)
	if !errors.Is(recs[1].Err, decode.ErrLineTooLong) || recs[1].Line != 3 || recs[2].Line != 4 || recs[2].Values[0] != 5 {
		t.Errorf("records: %v, line %d, then line %d", recs[1].Err, recs[1].Line, recs[2].Line)
	}
	if len(recs[1].Raw) > 1024 {
		t.Errorf("Raw of the refused line is %d bytes", len(recs[1].Raw))
	}
}

func TestDeliverErrorOnNewGeneration(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n"+rows(1, 3))
	sink := newFakeSink(t)
	var failGen1 atomicCount
	sink.fail = func(b Batch) error {
		if b.Generation == 1 && failGen1.inc() <= 3 {
			return errors.New("disk full")
		}
		return nil
	}
	start(t, testConfig(dir), sink)
	waitFor(t, "gen 0", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 3 })
	writeFile(t, a, "x,y\n"+rows(9, 10))
	waitFor(t, "gen 1 after retries", waitLong, func() bool { return len(sink.values("m", "a.csv", 1)) == 2 })
	if got := sink.values("m", "a.csv", 1); !slices.Equal(got, []float64{9, 10}) {
		t.Errorf("gen 1 rows %v", got)
	}
	if n := len(sink.noticesOf(Truncated)); n != 1 {
		t.Errorf("%d truncation notices, want 1", n)
	}
}

type atomicCount struct {
	mu sync.Mutex
	n  int
}

func (c *atomicCount) inc() int { c.mu.Lock(); defer c.mu.Unlock(); c.n++; return c.n }

func TestDialectThroughWatcher(t *testing.T) {
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "eu.csv"), "\ufeff# rig 2\r\nx;y;probe\r\n1,5;2;\"K; 3\"\r\n\r\n2,5;4;J\r\n")
	cfg := testConfig(dir)
	cfg.Sources[0].Dialect = decode.Dialect{Delimiter: ';', Comment: "#", DecimalComma: true}
	cfg.Sources[0].Text = []string{"probe"}
	sink := newFakeSink(t)
	start(t, cfg, sink)
	waitFor(t, "rows", waitLong, func() bool { return len(sink.values("m", "eu.csv", 0)) == 2 })
	recs := sink.records("m", "eu.csv", 0)
	if recs[0].Values[0] != 1.5 || recs[0].Text[0] != "K; 3" || recs[1].Line != 5 || recs[1].Values[1] != 4 {
		t.Errorf("records %+v", recs)
	}
}

func TestProgressLogLines(t *testing.T) {
	if term.IsTerminal(int(os.Stderr.Fd())) {
		t.Skip("stderr is a terminal: the progress bar is used instead")
	}
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "a.csv"), "x,y\n"+rows(1, 20))
	var buf syncBuffer
	cfg := testConfig(dir)
	cfg.NoProgress = false
	sink := newFakeSink(t)
	w, err := New(cfg, sink, slog.New(slog.NewTextHandler(&buf, nil)))
	if err != nil {
		t.Fatal(err)
	}
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background()) }()
	waitFor(t, "done line", waitLong, func() bool { return strings.Contains(buf.String(), "files present at start are read") })
	w.Close()
	if err := <-errc; err != nil {
		t.Fatal(err)
	}
	if s := buf.String(); !strings.Contains(s, `msg="reading files present at start" files=1 bytes=`) {
		t.Errorf("log:\n%s", s)
	}
}

type syncBuffer struct {
	mu sync.Mutex
	b  strings.Builder
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}
func (s *syncBuffer) String() string { s.mu.Lock(); defer s.mu.Unlock(); return s.b.String() }

func TestRecordLongerThanBatch(t *testing.T) {
	dir := t.TempDir()
	long := strings.Repeat("7", 600<<10) // longer than a read and a batch, shorter than MaxRecordBytes
	writeFile(t, filepath.Join(dir, "a.csv"), "x,y\n1,2\n3,0."+long+"\n5,6\n")
	cfg := testConfig(dir)
	cfg.MaxBatchBytes = 64
	sink := newFakeSink(t)
	start(t, cfg, sink)
	waitFor(t, "rows", waitLong, func() bool { return len(sink.records("m", "a.csv", 0)) == 3 })
	recs := sink.records("m", "a.csv", 0)
	if recs[1].Err != nil || len(recs[1].Raw) != len(long)+4 || recs[1].Values[1] != 7.0/9 || recs[2].Values[0] != 5 {
		t.Errorf("long record: err %v, raw %d bytes", recs[1].Err, len(recs[1].Raw))
	}
}

// TestPermissionDeniedSaidOnce: a file that cannot be read is tried again
// on every rescan, but the failure is reported when it starts, not again
// on each rescan while it lasts; once readable its rows are read, and a
// later failure is reported anew.
func TestPermissionDeniedSaidOnce(t *testing.T) {
	if os.Geteuid() == 0 {
		t.Skip("root reads files whatever their mode")
	}
	dir := t.TempDir()
	name := filepath.Join(dir, "locked.csv")
	writeFile(t, name, "x,y\n"+rows(1, 2))
	if err := os.Chmod(name, 0o200); err != nil {
		t.Fatal(err)
	}
	cfg := testConfig(dir)
	cfg.Rescan = 30 * time.Millisecond
	sink := newFakeSink(t)
	start(t, cfg, sink)
	errorsOf := func() int {
		k := 0
		for _, n := range sink.noticesOf(Error) {
			if n.Path == "locked.csv" {
				k++
			}
		}
		return k
	}
	waitFor(t, "the first notice", waitLong, func() bool { return errorsOf() >= 1 })
	time.Sleep(400 * time.Millisecond) // a dozen rescans
	if k := errorsOf(); k != 1 {
		t.Fatalf("%d notices for one unreadable file over a dozen rescans, want 1: %+v", k, sink.noticesOf(Error))
	}
	if err := os.Chmod(name, 0o644); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "rows once readable", waitLong, func() bool { return len(sink.values("m", "locked.csv", 0)) == 2 })
	// Unreadable again, with new rows: a new failure, reported once.
	if err := os.Chmod(name, 0o200); err != nil {
		t.Fatal(err)
	}
	appendFile(t, name, rows(3, 4))
	waitFor(t, "the second notice", waitLong, func() bool { return errorsOf() >= 2 })
	time.Sleep(400 * time.Millisecond)
	if k := errorsOf(); k != 2 {
		t.Fatalf("%d notices after the second failure, want 2", k)
	}
	if err := os.Chmod(name, 0o644); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "the new rows", waitLong, func() bool { return len(sink.values("m", "locked.csv", 0)) == 4 })
}
