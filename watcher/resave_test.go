package watcher

import (
	"context"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"
)

// saveByRename writes content to a temporary dot-file beside name and
// renames it over name, as editors, spreadsheets and rsync save.
func saveByRename(tb testing.TB, name, content string) {
	tb.Helper()
	tmp := filepath.Join(filepath.Dir(name), "."+filepath.Base(name)+".tmp")
	writeFile(tb, tmp, content)
	if err := os.Rename(tmp, name); err != nil {
		tb.Fatal(err)
	}
}

func noRotation(t *testing.T, sink *fakeSink) {
	t.Helper()
	if n := sink.noticesOf(Rotated); len(n) != 0 {
		t.Errorf("rotation notices %+v; a grown file is the same file", n)
	}
	if n := sink.noticesOf(Truncated); len(n) != 0 {
		t.Errorf("truncation notices %+v", n)
	}
}

// TestResaveGrowing: five saves by rename of a file growing 10 -> 50 rows
// store 50 rows, once each, in one generation.
func TestResaveGrowing(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n"+rows(1, 10))
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "10 rows", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 10 })
	for n := 20; n <= 50; n += 10 {
		saveByRename(t, a, "x,y\n"+rows(1, n))
		waitFor(t, "grown file", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == n })
	}
	time.Sleep(50 * time.Millisecond)
	if got := sink.values("m", "a.csv", 0); !slices.Equal(got, seq(1, 50)) {
		t.Errorf("rows %v, want 1..50 once each", got)
	}
	noRotation(t, sink)
	rs := sink.noticesOf(Resaved)
	if len(rs) != 4 || !strings.Contains(rs[0].Detail, "reading continues at line 12") {
		t.Errorf("resaved notices %+v, want 4, the first continuing at line 12", rs)
	}
	if st, _ := sink.committed("m", "a.csv"); len(st.Digest) == 0 {
		t.Error("no digest in the committed state")
	}
}

// TestResaveRewritingOldRow: a save that changes a row already read is a
// new generation, and the notice says why.
func TestResaveRewritingOldRow(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n"+rows(1, 10))
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "10 rows", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 10 })
	edited := strings.Replace("x,y\n"+rows(1, 15), "3,6\n", "3,7\n", 1)
	saveByRename(t, a, edited)
	waitFor(t, "generation 1", waitLong, func() bool { return len(sink.values("m", "a.csv", 1)) == 15 })
	rot := sink.noticesOf(Rotated)
	if len(rot) != 1 || rot[0].Generation != 1 || !strings.Contains(rot[0].Detail, "differ from the bytes read before") {
		t.Errorf("rotation notices %+v, want one saying the part already read differs", rot)
	}
	if got := sink.values("m", "a.csv", 0); !slices.Equal(got, seq(1, 10)) {
		t.Errorf("generation 0 rows changed: %v", got)
	}
	// A shorter save is a new generation too, with its own reason.
	saveByRename(t, a, "x,y\n"+rows(1, 2))
	waitFor(t, "generation 2", waitLong, func() bool { return len(sink.values("m", "a.csv", 2)) == 2 })
	if rot := sink.noticesOf(Rotated); len(rot) != 2 || !strings.Contains(rot[1].Detail, "fewer than the") {
		t.Errorf("rotation notices %+v", rot)
	}
}

// TestResaveWithinDebounce: saves and appends that land in one debounce
// window are read once, from the old position, without a new generation.
func TestResaveWithinDebounce(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n"+rows(1, 10))
	cfg := testConfig(dir)
	cfg.Debounce = 300 * time.Millisecond
	sink := newFakeSink(t)
	start(t, cfg, sink)
	waitFor(t, "10 rows", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 10 })
	batches := sink.batches
	appendFile(t, a, rows(11, 12))
	saveByRename(t, a, "x,y\n"+rows(1, 20))
	saveByRename(t, a, "x,y\n"+rows(1, 30))
	waitFor(t, "30 rows", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 30 })
	time.Sleep(400 * time.Millisecond)
	if got := sink.values("m", "a.csv", 0); !slices.Equal(got, seq(1, 30)) {
		t.Errorf("rows %v, want 1..30 once each", got)
	}
	noRotation(t, sink)
	sink.mu.Lock()
	if sink.batches != batches+1 {
		t.Errorf("%d batches for one window, want 1", sink.batches-batches)
	}
	sink.mu.Unlock()
}

// TestResaveAcrossRestart: the digest is part of the saved state, so a
// file saved anew while the watcher was stopped is still the same file.
// A state saved without a digest (an older plumb) gets one on its next
// read.
func TestResaveAcrossRestart(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n"+rows(1, 10))
	sink := newFakeSink(t)
	cfg := testConfig(dir)
	w, err := New(cfg, sink, nil)
	if err != nil {
		t.Fatal(err)
	}
	errc := make(chan error, 1)
	go func() { errc <- w.Run(context.Background()) }()
	waitFor(t, "10 rows", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 10 })
	w.Close()
	if err := <-errc; err != nil {
		t.Fatal(err)
	}
	st, _ := sink.committed("m", "a.csv")

	saveByRename(t, a, "x,y\n"+rows(1, 14))
	cfg.Sources[0].States = []FileState{st}
	start(t, cfg, sink)
	waitFor(t, "14 rows", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 14 })
	noRotation(t, sink)
	if len(sink.noticesOf(Resaved)) != 1 {
		t.Errorf("notices %+v, want one resave", sink.notices)
	}

	// No digest saved: appends go on, and the next state carries one.
	st, _ = sink.committed("m", "a.csv")
	st.Digest = nil
	old := st
	dir2 := t.TempDir()
	b := filepath.Join(dir2, "a.csv")
	if err := os.Link(a, b); err != nil {
		t.Skip("no hard links here:", err)
	}
	cfg2 := testConfig(dir2)
	cfg2.Sources[0].States = []FileState{old}
	sink2 := newFakeSink(t)
	sink2.state["m\x00a.csv"] = old
	start(t, cfg2, sink2)
	appendFile(t, b, rows(15, 16))
	waitFor(t, "appended rows", waitLong, func() bool { return len(sink2.values("m", "a.csv", 0)) == 2 })
	full, _ := os.ReadFile(b)
	got, _ := sink2.committed("m", "a.csv")
	want, err := resumeDigest(FileState{Offset: int64(len(full))}, strings.NewReader(string(full)))
	if err != nil {
		t.Fatal(err)
	}
	wantState, _ := want.(interface{ MarshalBinary() ([]byte, error) }).MarshalBinary()
	if !slices.Equal(got.Digest, wantState) {
		t.Error("the digest computed for a state without one is not the digest of the bytes read")
	}
}
