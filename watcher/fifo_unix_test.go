//go:build unix

package watcher

import (
	"path/filepath"
	"syscall"
	"testing"
)

func TestFIFOIsSkipped(t *testing.T) {
	dir := t.TempDir()
	if err := syscall.Mkfifo(filepath.Join(dir, "pipe.csv"), 0o644); err != nil {
		t.Skip("no mkfifo:", err)
	}
	writeFile(t, filepath.Join(dir, "a.csv"), "x,y\n"+rows(1, 2))
	sink := newFakeSink(t)
	start(t, testConfig(dir), sink)
	waitFor(t, "regular file", waitLong, func() bool { return len(sink.values("m", "a.csv", 0)) == 2 })
	waitFor(t, "fifo notice", waitLong, func() bool { return len(sink.noticesOf(Error)) == 1 })
}
