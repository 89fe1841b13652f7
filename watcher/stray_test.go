package watcher

import (
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"plumb/watcher/decode"
)

// TestHardLinkReadOnce: a second name of a file already read (a hard
// link) is skipped with a notice, whether it is there at start or made
// later; when the first name goes, the second continues where it was.
func TestHardLinkReadOnce(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n"+rows(1, 7))
	if err := os.Link(a, filepath.Join(dir, "b.csv")); err != nil {
		t.Skip("no hard links here:", err)
	}
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "7 rows", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 7 })
	waitFor(t, "hard-link notice", waitLong, func() bool { return len(sink.noticesOf(HardLink)) == 1 })
	if err := os.Link(a, filepath.Join(dir, "c.csv")); err != nil {
		t.Fatal(err)
	}
	appendFile(t, a, rows(8, 9))
	waitFor(t, "9 rows", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 9 })
	waitFor(t, "second hard-link notice", waitLong, func() bool { return len(sink.noticesOf(HardLink)) == 2 })
	time.Sleep(50 * time.Millisecond)
	for _, p := range []string{"b.csv", "c.csv"} {
		if n := len(sink.records("m", p, 0)); n != 0 {
			t.Errorf("%s: %d rows read under a second name", p, n)
		}
	}
	hl := sink.noticesOf(HardLink)[0]
	if hl.Path != "b.csv" || !strings.Contains(hl.Detail, "a.csv") {
		t.Errorf("notice %+v does not name the first name", hl)
	}
	// The first name goes: b.csv carries on from the position reached.
	if err := os.Remove(a); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "deleted", waitLong, func() bool { return len(sink.noticesOf(Deleted)) == 1 })
	appendFile(t, filepath.Join(dir, "b.csv"), rows(10, 10))
	waitFor(t, "b continues", waitLong, func() bool { return len(sink.values("m", "b.csv", 0)) == 1 })
	time.Sleep(50 * time.Millisecond)
	if got := sink.values("m", "b.csv", 0); !slices.Equal(got, []float64{10}) {
		t.Errorf("b.csv rows %v, want only the new one", got)
	}
	if got := len(sink.records("m", "c.csv", 0)); got != 0 {
		t.Errorf("c.csv read too (%d rows): one of the names must stay a link", got)
	}
}

// TestStrayFilesAreRefusedAlone: a file whose header does not fit, a
// UTF-16 file and a named pipe are each refused as a file (blocked,
// Refused, the finding named), while the model's other file is read;
// removing or fixing a file lifts its block, without a restart.
func TestStrayFilesAreRefusedAlone(t *testing.T) {
	dir := t.TempDir()
	writeFile(t, filepath.Join(dir, "a.csv"), "x,y\n"+rows(1, 3))
	notes := filepath.Join(dir, "notes.csv")
	writeFile(t, notes, "date,remark\n2026-12-01,calibrated\n")
	wide := filepath.Join(dir, "wide.csv")
	// "x,y\n1,2\n" in UTF-16 little-endian with its byte-order mark.
	writeFile(t, wide, "\xff\xfex\x00,\x00y\x00\n\x001\x00,\x002\x00\n\x00")
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "a.csv", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 3 })
	waitFor(t, "two refusals", waitLong, func() bool { return len(sink.noticesOf(Error)) == 2 })
	byPath := map[string]Notice{}
	for _, n := range sink.noticesOf(Error) {
		byPath[n.Path] = n
	}
	n := byPath["notes.csv"]
	var ce *decode.ColumnError
	if !n.Blocked || !n.Refused || !errors.As(n.Err, &ce) || !strings.Contains(n.Detail, `"date", "remark"`) || !strings.Contains(n.Detail, `lacks the model's ["x", "y"]`) {
		t.Errorf("notes.csv notice %+v: want blocked, refused, listing the header's columns", n)
	}
	n = byPath["wide.csv"]
	if !n.Blocked || !n.Refused || !errors.Is(n.Err, decode.ErrEncoding) || !strings.Contains(n.Detail, "UTF-16 little-endian") {
		t.Errorf("wide.csv notice %+v: want blocked, refused, naming UTF-16", n)
	}
	appendFile(t, filepath.Join(dir, "a.csv"), rows(4, 5))
	waitFor(t, "a.csv goes on", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 5 })

	if err := os.Remove(notes); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "notes.csv unblocked", waitLong, func() bool { return len(sink.noticesOf(Unblocked)) == 1 })
	if u := sink.noticesOf(Unblocked)[0]; u.Path != "notes.csv" || !strings.Contains(u.Detail, "removed") {
		t.Errorf("unblock notice %+v", u)
	}
	saveByRename(t, wide, "x,y\n"+rows(1, 2)) // saved again as UTF-8
	waitFor(t, "wide.csv read", waitLong, func() bool { return len(sink.values("m", "wide.csv", 0)) == 2 })
	waitFor(t, "wide.csv unblocked", waitLong, func() bool { return len(sink.noticesOf(Unblocked)) == 2 })
	if len(sink.noticesOf(Error)) != 2 {
		t.Errorf("notices repeated: %+v", sink.noticesOf(Error))
	}
}

// TestHeaderChangeAfterRowsBlocksUntilRemoved: a file that has given rows
// and then changes its header is blocked without Refused (the model's
// data is in doubt); removing it lifts the block.
func TestHeaderChangeAfterRowsBlocksUntilRemoved(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.csv")
	writeFile(t, a, "x,y\n"+rows(1, 3))
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "rows", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 3 })
	saveByRename(t, a, "x,z\n"+rows(1, 3))
	waitFor(t, "blocked", waitLong, func() bool { return len(sink.noticesOf(Error)) == 1 })
	if n := sink.noticesOf(Error)[0]; !n.Blocked || n.Refused {
		t.Errorf("notice %+v: want blocked, not refused (the file gave rows)", n)
	}
	if err := os.Remove(a); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "unblocked", waitLong, func() bool { return len(sink.noticesOf(Unblocked)) == 1 })
}
