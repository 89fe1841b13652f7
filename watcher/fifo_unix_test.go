//go:build unix

package watcher

import (
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
)

// TestFIFOIsSkipped: a named pipe among the files is refused as a file,
// without being opened (no writer ever comes), and its removal lifts the
// block.
func TestFIFOIsSkipped(t *testing.T) {
	dir := t.TempDir()
	pipe := filepath.Join(dir, "pipe.csv")
	if err := syscall.Mkfifo(pipe, 0o644); err != nil {
		t.Skip("no mkfifo:", err)
	}
	writeFile(t, filepath.Join(dir, "a.csv"), "x,y\n"+rows(1, 2))
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "regular file", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 2 })
	waitFor(t, "fifo notice", waitLong, func() bool { return len(sink.noticesOf(Error)) == 1 })
	n := sink.noticesOf(Error)[0]
	if !n.Blocked || !n.Refused || !strings.Contains(n.Detail, "named pipe") {
		t.Errorf("notice %+v: want blocked, refused, naming a named pipe", n)
	}
	if err := os.Remove(pipe); err != nil {
		t.Fatal(err)
	}
	waitFor(t, "unblocked", waitLong, func() bool { return len(sink.noticesOf(Unblocked)) == 1 })
}
